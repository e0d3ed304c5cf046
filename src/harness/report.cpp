// The building blocks of the HTML reports (include/alphaledger/report.hpp): escaping, embedding
// JSON, thinning points for drawing, and writing the file in one step.
#include "alphaledger/report.hpp"

#include <map>
#include <fcntl.h>
#include <sys/stat.h>
#include <unistd.h>

#include <algorithm>
#include <cerrno>
#include <cstring>
#include <map>
#include <string>

namespace alphaledger {
namespace {

// Length of the valid UTF-8 sequence at s[i], or 0 when it is not one.
std::size_t utf8_length(std::string_view s, std::size_t i) {
  const auto b = static_cast<unsigned char>(s[i]);
  std::size_t n = 0;
  unsigned min = 0;
  unsigned cp = 0;
  if (b < 0x80) return 1;
  if ((b & 0xE0) == 0xC0) {
    n = 2, cp = b & 0x1F, min = 0x80;
  } else if ((b & 0xF0) == 0xE0) {
    n = 3, cp = b & 0x0F, min = 0x800;
  } else if ((b & 0xF8) == 0xF0) {
    n = 4, cp = b & 0x07, min = 0x10000;
  } else {
    return 0;
  }
  if (i + n > s.size()) return 0;
  for (std::size_t k = 1; k < n; ++k) {
    const auto c = static_cast<unsigned char>(s[i + k]);
    if ((c & 0xC0) != 0x80) return 0;
    cp = (cp << 6) | (c & 0x3F);
  }
  if (cp < min || cp > 0x10FFFF || (cp >= 0xD800 && cp <= 0xDFFF)) return 0;
  return n;
}

std::string folder_of(const std::string& path) {
  const auto slash = path.find_last_of('/');
  if (slash == std::string::npos) return ".";
  if (slash == 0) return "/";
  return path.substr(0, slash);
}

std::string accepted_text() { return "a file name in an existing folder that you can write to"; }

Error path_error(std::string_view option, const std::string& path, const std::string& why) {
  return invalid_input(std::string(option) + " '" + excerpt(path) + "' cannot be written: " + why +
                       " (accepted: " + accepted_text() + ")");
}

}  // namespace

std::string html_escape(std::string_view text) {
  std::string out;
  out.reserve(text.size() + text.size() / 8);
  for (std::size_t i = 0; i < text.size();) {
    const std::size_t n = utf8_length(text, i);
    if (n == 0) {
      out += "\xEF\xBF\xBD";  // U+FFFD
      ++i;
      continue;
    }
    if (n == 1) {
      switch (text[i]) {
        case '&':
          out += "&amp;";
          break;
        case '<':
          out += "&lt;";
          break;
        case '>':
          out += "&gt;";
          break;
        case '"':
          out += "&quot;";
          break;
        case '\'':
          out += "&#39;";
          break;
        default:
          out += text[i];
      }
    } else {
      out.append(text.substr(i, n));
    }
    i += n;
  }
  return out;
}

std::string script_json(std::string_view json_text) {
  std::string out;
  out.reserve(json_text.size() + 64);
  for (std::size_t i = 0; i < json_text.size(); ++i) {
    const char c = json_text[i];
    if (c == '<') {
      out += "\\u003c";
    } else if (c == '>') {
      out += "\\u003e";
    } else if (c == '&') {
      out += "\\u0026";
    } else if (c == '\xE2' && i + 2 < json_text.size() && json_text[i + 1] == '\x80' &&
               (json_text[i + 2] == '\xA8' || json_text[i + 2] == '\xA9')) {
      out += json_text[i + 2] == '\xA8' ? "\\u2028" : "\\u2029";
      i += 2;
    } else {
      out += c;
    }
  }
  return out;
}

std::vector<std::size_t> drawing_indices(std::size_t count, const std::vector<bool>& keep,
                                         std::size_t max_points) {
  std::vector<std::size_t> out;
  if (count == 0) return out;
  if (count <= max_points) {
    out.resize(count);
    for (std::size_t i = 0; i < count; ++i) out[i] = i;
    return out;
  }
  std::size_t kept = 0;
  for (std::size_t i = 0; i < keep.size() && i < count; ++i) kept += keep[i] ? 1 : 0;
  // The budget left for evenly spaced points, at least first and last.
  const std::size_t budget = max_points > kept + 2 ? max_points - kept : 2;
  const double stride = static_cast<double>(count - 1) / static_cast<double>(budget - 1);
  std::size_t next_even = 0;  // the k-th evenly spaced index is round(k * stride)
  std::size_t k = 0;
  for (std::size_t i = 0; i < count; ++i) {
    bool take = (i < keep.size() && keep[i]) || i == 0 || i == count - 1;
    while (k < budget && next_even < i) {
      ++k;
      next_even = static_cast<std::size_t>(static_cast<double>(k) * stride + 0.5);
    }
    if (k < budget && next_even == i) take = true;
    if (take) out.push_back(i);
  }
  return out;
}

Status check_output_path(const std::string& path, std::string_view option) {
  if (path.empty()) return path_error(option, path, "the name is empty");
  struct stat st {};
  if (::stat(path.c_str(), &st) == 0 && S_ISDIR(st.st_mode))
    return path_error(option, path, "it is a folder");
  const std::string folder = folder_of(path);
  if (::stat(folder.c_str(), &st) != 0 || !S_ISDIR(st.st_mode)) {
    return path_error(option, path, "the folder '" + excerpt(folder) + "' does not exist");
  }
  if (::access(folder.c_str(), W_OK) != 0) {
    return path_error(option, path, "the folder '" + excerpt(folder) + "' is not writable");
  }
  return {};
}

Status write_file_atomically(const std::string& path, std::string_view content, std::string_view option) {
  if (auto s = check_output_path(path, option); !s) return s;
  std::string tmp = path + ".tmp-XXXXXX";
  const int fd = ::mkstemp(tmp.data());
  if (fd < 0) return path_error(option, path, std::strerror(errno));
  auto fail = [&](const char* what, int err) -> Status {
    ::close(fd);
    ::unlink(tmp.c_str());
    return io_error(std::string(option) + " '" + excerpt(path) + "': " + what +
                         " failed: " + std::strerror(err) + " (nothing was written)");
  };
  (void)::fchmod(fd, 0644);  // mkstemp makes 0600; a report is meant to be shared
  std::size_t done = 0;
  while (done < content.size()) {
    const ssize_t n = ::write(fd, content.data() + done, content.size() - done);
    if (n < 0) {
      if (errno == EINTR) continue;
      return fail("writing", errno);
    }
    done += static_cast<std::size_t>(n);
  }
  if (::fsync(fd) != 0) return fail("syncing", errno);
  if (::close(fd) != 0) {
    const int err = errno;
    ::unlink(tmp.c_str());
    return io_error(std::string(option) + " '" + excerpt(path) +
                         "': closing failed: " + std::strerror(err) + " (nothing was written)");
  }
  if (::rename(tmp.c_str(), path.c_str()) != 0) {
    const int err = errno;
    ::unlink(tmp.c_str());
    return path_error(option, path, std::string("renaming the finished file failed: ") + std::strerror(err));
  }
  const int dir = ::open(folder_of(path).c_str(), O_RDONLY | O_DIRECTORY);
  if (dir >= 0) {
    ::fsync(dir);
    ::close(dir);
  }
  return {};
}

std::vector<double> reserved_after_each(const std::vector<DecisionRecord>& history,
                                        const std::vector<RunningEntry>& running) {
  std::map<std::uint64_t, double> level_of;  // launch number -> reserved level
  for (const auto& r : history) level_of[r.launch] = r.level;
  for (const auto& e : running) level_of[e.launch] = e.level;
  std::map<std::uint64_t, double> now;  // running after the events so far, in launch order
  std::vector<double> out;
  std::uint64_t step = 1, next_launch = 1;
  const auto launch_next = [&]() {
    const auto it = level_of.find(next_launch);
    now[next_launch] = it == level_of.end() ? 0.0 : it->second;
    ++next_launch;
  };
  for (const auto& r : history) {
    for (; step < r.step; ++step) launch_next();
    if (r.launch >= next_launch) {
      next_launch = r.launch + 1;  // launched and decided at one step: never running
    } else {
      now.erase(r.launch);
    }
    step = r.step + 1;
    if (r.abandoned) continue;
    double sum = 0;
    for (const auto& [launch, level] : now) sum += level;
    out.push_back(sum);
  }
  return out;
}

}  // namespace alphaledger
