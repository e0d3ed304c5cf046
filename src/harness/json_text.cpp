// json_text(): JSON text that never throws on bytes that are not UTF-8 (harness/json_text.hpp).
#include "harness/json_text.hpp"

#include <cstdint>

namespace alphaledger {
namespace {

// The length of the UTF-8 sequence starting at s[i], or 0 if it is not a valid one (overlong
// forms, surrogates and code points above U+10FFFF are not valid; RFC 3629).
std::size_t utf8_sequence(const std::string& s, std::size_t i) {
  const auto byte = [&](std::size_t k) { return static_cast<std::uint8_t>(s[k]); };
  const std::uint8_t b = byte(i);
  if (b < 0x80) return 1;
  std::size_t len = 0;
  std::uint32_t cp = 0;
  if (b >= 0xC2 && b <= 0xDF) {
    len = 2;
    cp = b & 0x1Fu;
  } else if (b >= 0xE0 && b <= 0xEF) {
    len = 3;
    cp = b & 0x0Fu;
  } else if (b >= 0xF0 && b <= 0xF4) {
    len = 4;
    cp = b & 0x07u;
  } else {
    return 0;
  }
  if (i + len > s.size()) return 0;
  for (std::size_t k = 1; k < len; ++k) {
    if ((byte(i + k) & 0xC0u) != 0x80u) return 0;
    cp = (cp << 6) | (byte(i + k) & 0x3Fu);
  }
  if ((len == 3 && cp < 0x800) || (len == 4 && cp < 0x10000) || cp > 0x10FFFF) return 0;
  if (cp >= 0xD800 && cp <= 0xDFFF) return 0;
  return len;
}

// `s` with every byte that does not start a valid UTF-8 sequence written as \xHH.
std::string escape_bad_bytes(const std::string& s) {
  static constexpr char kHex[] = "0123456789abcdef";
  std::string out;
  out.reserve(s.size());
  for (std::size_t i = 0; i < s.size();) {
    const std::size_t len = utf8_sequence(s, i);
    if (len == 0) {
      const auto b = static_cast<std::uint8_t>(s[i]);
      out += "\\x";
      out += kHex[b >> 4];
      out += kHex[b & 0x0F];
      ++i;
    } else {
      out.append(s, i, len);
      i += len;
    }
  }
  return out;
}

bool valid_utf8(const std::string& s) {
  for (std::size_t i = 0; i < s.size();) {
    const std::size_t len = utf8_sequence(s, i);
    if (len == 0) return false;
    i += len;
  }
  return true;
}

// A copy of `v` whose strings (keys too) are valid UTF-8.
template <class Json>
Json repaired(const Json& v) {
  if (v.is_string()) {
    const auto& s = v.template get_ref<const std::string&>();
    return valid_utf8(s) ? v : Json(escape_bad_bytes(s));
  }
  if (v.is_array()) {
    Json out = Json::array();
    for (const auto& e : v) out.push_back(repaired(e));
    return out;
  }
  if (v.is_object()) {
    Json out = Json::object();
    for (auto it = v.begin(); it != v.end(); ++it) {
      const std::string& key = it.key();
      out[valid_utf8(key) ? key : escape_bad_bytes(key)] = repaired(it.value());
    }
    return out;
  }
  return v;
}

template <class Json>
std::string text_of(const Json& v) {
  try {
    return v.dump();  // the common case: every string is valid UTF-8
  } catch (const nlohmann::json::exception&) {
    // Only bad UTF-8 makes dump() throw; write those bytes as \xHH instead.
  }
  try {
    return repaired(v).dump();
  } catch (const nlohmann::json::exception&) {
    return "null";  // not reached: every string is valid UTF-8 now
  }
}

}  // namespace

std::string json_text(const nlohmann::ordered_json& value) { return text_of(value); }
std::string json_text(const nlohmann::json& value) { return text_of(value); }

}  // namespace alphaledger
