// Requests given as parsed JSON (project-internal: public headers carry no nlohmann types; the
// string-based forms are in alphaledger/service.hpp).
#pragma once

#include <nlohmann/json.hpp>

#include "alphaledger/service.hpp"

namespace alphaledger {

// A test read from a JSON object {"id": ..., "p_value": ...}, as test_from_json_text. The
// one-argument form takes p_value only; the second form also reads summary columns
// (docs/formats.md) in `summary_direction`, the stream's frozen direction (pipe does this).
Result<TestInput> test_from_json(const nlohmann::json& object);
Result<TestInput> test_from_json(const nlohmann::json& object, Alternative summary_direction);

// The body of a stream creation (POST /v1/streams), as stream_request_from_json_text. Unknown keys
// are refused, so a misspelt parameter cannot silently fall back to its default.
Result<StreamRequest> stream_request_from_json(const nlohmann::json& object);

}  // namespace alphaledger
