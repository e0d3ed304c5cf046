// The one JSON reader of every input (parse_json_object, harness/json_input.hpp): strict about
// duplicate keys, nesting depth and numbers a double cannot hold.
#include <nlohmann/json.hpp>
#include <string>
#include <vector>

#include "alphaledger/text.hpp"
#include "harness/json_input.hpp"

namespace alphaledger {

namespace {

// Builds the document of parse_json_object, refusing what a plain parse would accept or answer
// with library text: keys given twice, nesting deeper than kMaxJsonDepth, numbers that underflow
// to 0. Containers are built in place, as nlohmann's own DOM builder does: a pointer to an open
// container stays valid because its parent grows only after the container is closed.
class StrictBuilder {
 public:
  using Json = nlohmann::json;
  explicit StrictBuilder(std::string_view text) : text_(text) {}

  bool null() { return put(nullptr) != nullptr; }
  bool boolean(bool v) { return put(v) != nullptr; }
  bool number_integer(Json::number_integer_t v) { return put(v) != nullptr; }
  bool number_unsigned(Json::number_unsigned_t v) { return put(v) != nullptr; }
  bool number_float(Json::number_float_t v, const Json::string_t& text) {
    if (v == 0 && nonzero_mantissa(text)) {
      error_ = "the number " + excerpt(text) +
               " is not zero but too small to be held as a number (the smallest is about 4.9e-324); write 0 "
               "if zero is meant";
      return false;
    }
    return put(v) != nullptr;
  }
  bool string(Json::string_t& v) { return put(std::move(v)) != nullptr; }
  bool binary(Json::binary_t&) {
    error_ = "not valid JSON (binary values are not JSON text)";
    return false;
  }
  bool start_object(std::size_t) { return open(Json::object()); }
  bool key(Json::string_t& k) {
    Json* object = stack_.back();
    if (object->contains(k)) {
      error_ = "the key '" + excerpt(k) + "' appears twice in one object; give each key once";
      return false;
    }
    slot_ = &(*object)[k];
    return true;
  }
  bool end_object() {
    stack_.pop_back();
    return true;
  }
  bool start_array(std::size_t) { return open(Json::array()); }
  bool end_array() {
    stack_.pop_back();
    return true;
  }
  bool parse_error(std::size_t position, const std::string&, const nlohmann::json::exception& ex) {
    const std::size_t at = std::min(position, text_.size());
    const std::string word = word_near(at);
    if (ex.id == 406) {
      error_ = "the number " + excerpt(word) + " near byte " + std::to_string(at) +
               " is too large to be held as a number";
    } else if (is_non_number(word)) {
      error_ = "not valid JSON near byte " + std::to_string(at) + ": " + excerpt(word) +
               " is not a JSON number (JSON has no NaN or Infinity); give a number such as 0.01";
    } else {
      error_ = "not valid JSON (at byte " + std::to_string(at) + ")";
    }
    return false;
  }

  std::string error_;
  Json root_;

 private:
  static bool nonzero_mantissa(std::string_view text) {
    for (char c : text) {
      if (c == 'e' || c == 'E') break;
      if (c >= '1' && c <= '9') return true;
    }
    return false;
  }
  static bool is_non_number(std::string word) {
    if (!word.empty() && (word[0] == '-' || word[0] == '+')) word.erase(0, 1);
    std::transform(word.begin(), word.end(), word.begin(),
                   [](char c) { return static_cast<char>(c >= 'A' && c <= 'Z' ? c - 'A' + 'a' : c); });
    return word.rfind("nan", 0) == 0 || word.rfind("inf", 0) == 0;
  }
  // The run of letters, digits, signs and dots around byte `at` (the token the error is in).
  std::string word_near(std::size_t at) const {
    const auto part = [](char c) {
      return (c >= 'a' && c <= 'z') || (c >= 'A' && c <= 'Z') || (c >= '0' && c <= '9') || c == '-' ||
             c == '+' || c == '.';
    };
    std::size_t b = at, e = at;
    if (b > 0 && b == text_.size()) --b, --e;
    while (b > 0 && part(text_[b - 1])) --b;
    while (e < text_.size() && part(text_[e])) ++e;
    return std::string(text_.substr(b, e - b));
  }
  Json* put(Json v) {
    if (stack_.empty()) {
      root_ = std::move(v);
      return &root_;
    }
    Json* parent = stack_.back();
    if (parent->is_array()) {
      parent->push_back(std::move(v));
      return &parent->back();
    }
    *slot_ = std::move(v);
    return slot_;
  }
  bool open(Json container) {
    if (stack_.size() >= static_cast<std::size_t>(kMaxJsonDepth)) {
      error_ = "JSON nested deeper than " + std::to_string(kMaxJsonDepth) +
               " levels; expected one flat object such as {\"id\": \"t1\", \"p_value\": 0.01}";
      return false;
    }
    stack_.push_back(put(std::move(container)));
    return true;
  }

  std::string_view text_;
  std::vector<Json*> stack_;
  Json* slot_ = nullptr;
};

}  // namespace

Result<nlohmann::json> parse_json_object(std::string_view text) {
  StrictBuilder builder(text);
  bool ok = false;
  try {
    ok = nlohmann::json::sax_parse(text, &builder, nlohmann::json::input_format_t::json, /*strict=*/true,
                                   /*ignore_comments=*/false);
  } catch (const std::exception&) {
    ok = false;
  }
  if (!ok) {
    if (builder.error_.empty()) builder.error_ = "not valid JSON";
    if (builder.error_.rfind("not valid JSON", 0) == 0)
      builder.error_ += "; expected one object such as {\"id\": \"t1\", \"p_value\": 0.01}";
    return invalid_input(builder.error_);
  }
  const nlohmann::json& j = builder.root_;
  if (!j.is_object()) {
    return invalid_input(
        std::string("expected a JSON object such as {\"id\": \"t1\", \"p_value\": 0.01}, got ") +
        (j.is_array()     ? "an array"
         : j.is_string()  ? "a string"
         : j.is_number()  ? "a number"
         : j.is_boolean() ? "a boolean"
                          : "null"));
  }
  return std::move(builder.root_);
}

}  // namespace alphaledger
