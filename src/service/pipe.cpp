// alphaledger pipe: JSON Lines in, one answer per line out (docs/http.md, "pipe").
#include <poll.h>
#include <unistd.h>

#include <cerrno>
#include <cstring>

#include "alphaledger/forms.hpp"
#include "alphaledger/service.hpp"
#include "alphaledger/test_log.hpp"
#include "alphaledger/text.hpp"
#include "harness/json_input.hpp"
#include "harness/json_text.hpp"
#include "service/http_requests.hpp"
#include "service/json_input.hpp"

namespace alphaledger {
namespace {

// What a line asks for: its "event" key, absent meaning decide (docs/http.md, "pipe").
enum class LineEvent { kDecide, kLaunch, kAbandon, kLook };

// One input line, parsed or refused.
struct LineWork {
  std::uint64_t line = 0;
  LineEvent event = LineEvent::kDecide;
  std::optional<TestInput> input;  // set when the line is a valid test (for launch and abandon: the id)
  std::optional<LookData> look;    // a look line's data
  std::string error;               // otherwise, why not
};

// The event of a line: absent or "decide", "launch", "abandon"; anything else is refused.
Result<LineEvent> line_event(const nlohmann::json& j) {
  auto it = j.find("event");
  if (it == j.end()) return LineEvent::kDecide;
  const char* accepted = "; accepted: \"launch\", \"abandon\", \"look\", \"decide\" (the same as no event)";
  if (!it->is_string()) return invalid_input("event must be a JSON string" + std::string(accepted));
  const auto& e = it->get_ref<const std::string&>();
  if (e == "decide") return LineEvent::kDecide;
  if (e == "launch") return LineEvent::kLaunch;
  if (e == "abandon") return LineEvent::kAbandon;
  if (e == "look") return LineEvent::kLook;
  return invalid_input("unknown event " + excerpt(e) + std::string(accepted));
}

// The id of a launch or abandon line, read as on a decide line (docs/formats.md): a JSON string,
// or an integer taken as its decimal text (42 is the id "42"), passing validate_test_id.
Result<std::string> event_id(const nlohmann::json& j) {
  auto it = j.find("id");
  if (it == j.end()) return invalid_input("missing field 'id' (a launch or abandon names the test's id)");
  std::string id;
  if (it->is_string()) {
    id = it->get<std::string>();
  } else if (it->is_number_integer() || it->is_number_unsigned()) {
    id = json_text(*it);
  } else {
    return invalid_input("id must be a JSON string (or an integer), got " + excerpt(json_text(*it)));
  }
  if (auto s = validate_test_id(id); !s) return invalid_input("id: " + s.error().message);
  return id;
}

LineWork parse_line(std::uint64_t line_no, std::string_view text, Alternative direction) {
  LineWork w;
  w.line = line_no;
  const std::string_view t = trim(text);
  if (t.empty()) {
    w.error = "empty line; each line must be one JSON object such as {\"id\": \"t1\", \"p_value\": 0.01}";
    return w;
  }
  auto j = parse_json_object(t);
  if (!j) {
    w.error = j.error().message;
    return w;
  }
  auto event = line_event(*j);
  if (!event) {
    w.error = event.error().message;
    return w;
  }
  w.event = *event;
  if (w.event != LineEvent::kDecide) {
    auto id = event_id(*j);
    if (!id) {
      w.error = id.error().message;
      return w;
    }
    w.input = TestInput{std::move(*id), 0};
    if (w.event == LineEvent::kLook) {
      auto data = routes::look_from_json(*j, {"event", "id"});
      if (!data) {
        w.input.reset();
        w.error = data.error().message;
        return w;
      }
      w.look = std::move(*data);
    }
    return w;
  }
  auto input = test_from_json(*j, direction);  // summary rows in the stream's frozen direction
  if (!input) {
    w.error = input.error().message;
    return w;
  }
  w.input = std::move(input).value();
  return w;
}

LineWork too_long(std::uint64_t line_no) {
  LineWork w;
  w.line = line_no;
  w.error =
      "line longer than " + std::to_string(kMaxPipeLineBytes) + " bytes; each line must be one JSON object";
  return w;
}

class PipeRun {
 public:
  PipeRun(Ledger& ledger, std::string_view stream, std::ostream& out)
      : ledger_(ledger), stream_(stream), out_(out) {}

  // Answers a group of complete lines in order: decide, launch and abandon lines together, with
  // one synced write per group (group commit, Ledger::apply_events). Returns an error on storage
  // failure or when the output cannot be written.
  Status answer(std::vector<LineWork>& work) {
    // Looks are answered one by one; every other line joins a run answered in order with group
    // commit (apply_in_order).
    std::vector<LineWork> run;
    for (auto& w : work) {
      if (!w.input || w.event != LineEvent::kLook) {
        run.push_back(std::move(w));
        continue;
      }
      if (!run.empty()) {
        if (auto s = answer_run(run); !s) return s;
        run.clear();
      }
      if (auto s = answer_look(w); !s) return s;
    }
    if (!run.empty()) return answer_run(run);
    return {};
  }

  PipeSummary summary_;

 private:
  // A look line: Ledger::look, answered with look_json (a stop counts as a decision).
  Status answer_look(const LineWork& w) {
    auto l = ledger_.look(stream_, w.input->id, *w.look);
    std::string text;
    if (!l) {
      text = line_error_json(w.line, l.error().message);
      ++summary_.bad;
    } else {
      text = look_json(*l);
      if (l->repeat) {
        ++summary_.repeats;
      } else if (l->stop) {
        ++summary_.decided;
      } else {
        ++summary_.looked;
      }
    }
    out_ << text << '\n';
    out_.flush();
    if (!out_)
      return io_error("cannot write the answer to line " + std::to_string(w.line) + " to the output");
    ++summary_.lines;
    if (!l && is_storage_failure(l.error().kind))
      return with_message(l.error(), "line " + std::to_string(w.line) + ": " + l.error().message);
    return {};
  }

  // Decides and answers a run of decide, launch and abandon lines (and refused lines).
  Status answer_run(std::vector<LineWork>& work) {
    std::vector<EventInput> inputs;
    for (const auto& w : work) {
      if (!w.input) continue;
      const EventType type = w.event == LineEvent::kLaunch    ? EventType::kLaunch
                             : w.event == LineEvent::kAbandon ? EventType::kAbandon
                                                              : EventType::kDecide;
      inputs.push_back({type, w.input->id, w.input->p_value, w.input->e_value});
    }
    auto results = apply_in_order(ledger_, stream_, inputs);
    std::size_t next_input = 0;
    for (std::size_t k = 0; k < work.size(); ++k) {
      std::string text;
      std::optional<Error> fatal;
      if (!work[k].input) {
        text = line_error_json(work[k].line, work[k].error);
        ++summary_.bad;
      } else {
        auto& r = results[next_input++];
        if (!r) break;  // not attempted after a storage failure: stop without answering
        if (r->ok()) {
          text = answer_text(r->value());
        } else {
          text = line_error_json(work[k].line, r->error().message);
          ++summary_.bad;
          if (is_storage_failure(r->error().kind)) fatal = r->error();
        }
      }
      out_ << text << '\n';
      out_.flush();
      if (!out_)
        return io_error("cannot write the answer to line " + std::to_string(work[k].line) + " to the output");
      ++summary_.lines;
      if (fatal) return with_message(*fatal, "line " + std::to_string(work[k].line) + ": " + fatal->message);
    }
    return {};
  }

  // The answer line of a done event, counted in the summary.
  std::string answer_text(const EventOutcome& outcome) {
    if (const auto* d = std::get_if<DecideResult>(&outcome)) {
      ++(d->repeat ? summary_.repeats : summary_.decided);
      return decision_json(*d);
    }
    if (const auto* l = std::get_if<LaunchResult>(&outcome)) {
      ++(l->repeat ? summary_.repeats : summary_.launched);
      return launch_json(*l);
    }
    const auto& a = std::get<AbandonResult>(outcome);
    ++(a.repeat ? summary_.repeats : summary_.abandoned);
    return abandon_json(a);
  }

  Ledger& ledger_;
  std::string stream_;
  std::ostream& out_;
};

// Splits the input into lines as it arrives and parses each. A line ends with LF, CRLF or a lone
// CR, as in logs (docs/formats.md); a line longer than kMaxPipeLineBytes is answered once as too
// long and the rest of it skipped.
class LineSplitter {
 public:
  explicit LineSplitter(Alternative direction) : direction_(direction) {}

  void append(const char* bytes, std::size_t n) { buffer_.append(bytes, n); }

  // Every complete line read so far, parsed (and, at the end of input, the last unterminated one).
  std::vector<LineWork> take(bool eof) {
    if (after_cr_ && !buffer_.empty()) {
      if (buffer_[0] == '\n') buffer_.erase(0, 1);
      after_cr_ = false;
    }
    std::vector<LineWork> work;
    std::size_t start = 0;
    while (true) {
      const std::size_t end = buffer_.find_first_of("\r\n", start);
      if (end == std::string::npos) break;
      if (skipping_long_) {
        skipping_long_ = false;  // the rest of an over-long line: already answered
      } else {
        ++line_no_;
        if (end - start > kMaxPipeLineBytes) {
          work.push_back(too_long(line_no_));
        } else {
          const std::string_view line = std::string_view(buffer_).substr(start, end - start);
          work.push_back(parse_line(line_no_, line, direction_));
        }
      }
      start = end + 1;
      if (buffer_[end] == '\r') {
        if (start < buffer_.size()) {
          if (buffer_[start] == '\n') ++start;
        } else {
          after_cr_ = true;  // the LF of a CRLF may arrive with the next read
        }
      }
    }
    buffer_.erase(0, start);
    if (!skipping_long_ && buffer_.size() > kMaxPipeLineBytes) {
      ++line_no_;
      work.push_back(too_long(line_no_));
      skipping_long_ = true;
      buffer_.clear();
    } else if (skipping_long_) {
      buffer_.clear();
    }
    if (eof && !buffer_.empty() && !skipping_long_) {
      ++line_no_;
      work.push_back(parse_line(line_no_, buffer_, direction_));
      buffer_.clear();
    }
    return work;
  }

 private:
  Alternative direction_;
  std::string buffer_;  // bytes read but not yet split into lines
  std::uint64_t line_no_ = 0;
  bool skipping_long_ = false;  // inside a line already answered as too long
  bool after_cr_ = false;       // the last line ended with CR at the end of the buffer: skip one LF
};

// What one wait for input gave.
struct ReadStep {
  bool interrupted = false;  // the wait was interrupted by a signal: nothing happened, wait again
  bool stop = false;         // asked to stop: nothing was read
  bool eof = false;          // the input has ended
};

// Waits until the input or the stop descriptor (when >= 0) is ready, and reads what the input has
// into `lines`. Once asked to stop, nothing more is read.
Result<ReadStep> wait_and_read(int in_fd, int stop_fd, LineSplitter& lines) {
  ReadStep step;
  pollfd fds[2] = {{in_fd, POLLIN, 0}, {stop_fd, POLLIN, 0}};
  const nfds_t n = stop_fd >= 0 ? 2 : 1;
  const int ready = ::poll(fds, n, -1);
  if (ready < 0) {
    if (errno == EINTR) {
      step.interrupted = true;
      return step;
    }
    return io_error(std::string("cannot wait for input: ") + std::strerror(errno));
  }
  step.stop = n == 2 && (fds[1].revents & POLLIN) != 0;
  if (!step.stop && (fds[0].revents & (POLLIN | POLLHUP | POLLERR)) != 0) {
    char chunk[65536];
    const ssize_t got = ::read(in_fd, chunk, sizeof chunk);
    if (got < 0) {
      if (errno != EINTR && errno != EAGAIN)
        return io_error(std::string("cannot read the input: ") + std::strerror(errno));
    } else if (got == 0) {
      step.eof = true;
    } else {
      lines.append(chunk, static_cast<std::size_t>(got));
    }
  }
  if (!step.stop && (fds[0].revents & POLLNVAL) != 0)
    return io_error("cannot read the input: not an open file descriptor");
  return step;
}

}  // namespace

Result<PipeSummary> run_pipe(Ledger& ledger, std::string_view stream, int in_fd, std::ostream& out,
                             int stop_fd) {
  auto info = ledger.status(stream);
  if (!info) return info.error();
  PipeRun run(ledger, stream, out);
  LineSplitter lines(info->alternative);
  bool eof = false;
  while (!eof) {
    auto step = wait_and_read(in_fd, stop_fd, lines);
    if (!step) return step.error();
    if (step->interrupted) continue;
    eof = step->eof;
    // The complete lines already read are answered, also when asked to stop.
    std::vector<LineWork> work = lines.take(eof);
    if (!work.empty()) {
      if (auto s = run.answer(work); !s) return s.error();
    }
    if (step->stop) {
      run.summary_.stopped = true;
      break;
    }
  }
  return run.summary_;
}

}  // namespace alphaledger
