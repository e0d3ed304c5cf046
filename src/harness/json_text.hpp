// The one way this project turns a JSON value into text (project-internal: public headers carry
// no nlohmann types). Every JSON line the program writes (replay, simulate, the ledger commands,
// pipe, HTTP, error reports) goes through json_text().
//
// Numbers: a double is written in the shortest form that reads back to the identical double; the
// forms module (alphaledger/forms.hpp) writes non-finite numbers as null before they get here.
// Strings: test ids are refused on input unless they are valid UTF-8 (validate_test_id), so only
// text the program did not check (a path, a message) can hold bytes that are not UTF-8. Such a byte
// is written as the six characters \xHH (a backslash escaped for JSON, then x and two hex digits),
// the way excerpt() shows it in messages; valid text is written unchanged. json_text never throws.
#pragma once

#include <nlohmann/json.hpp>
#include <string>

namespace alphaledger {

std::string json_text(const nlohmann::ordered_json& value);
std::string json_text(const nlohmann::json& value);

}  // namespace alphaledger
