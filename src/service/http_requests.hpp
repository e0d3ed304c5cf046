// What the HTTP routes share (project-internal): the answers every route may give (implemented in
// http_service.cpp, beside the error -> status mapping) and the readers of request parts
// (http_requests.cpp). docs/http.md is the user guide.
#pragma once

#include <cstddef>
#include <cstdint>
#include <nlohmann/json.hpp>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "alphaledger/ledger.hpp"
#include "alphaledger/result.hpp"
#include "service/http_server.hpp"

namespace alphaledger::routes {

// ---- answers (http_service.cpp) ----------------------------------------------------------------

// `body` (a JSON text from alphaledger/forms.hpp) as the answer, with its line end.
http::Response json_answer(int status, std::string body);
// {"error": {"code", "message"}} with `status`.
http::Response error_response(int status, std::string_view code, const std::string& message);
// Ledger errors to HTTP (docs/http.md "Errors").
http::Response ledger_error(const Error& e);
// The answer to a request the server refused itself (malformed, too slow, too large).
http::Response protocol_error(int status, const std::string& what, std::size_t max_body);

// ---- reading requests (http_requests.cpp) --------------------------------------------------------

inline constexpr std::string_view kCreateExample =
    R"({"name": "checkout-team", "rule": "lord++", "alpha": 0.05})";
inline constexpr std::string_view kDecideExample = R"({"id": "exp-0142", "p_value": 0.0004})";
inline constexpr std::string_view kLaunchExample = R"({"id": "exp-0150"})";
inline constexpr std::string_view kLookExample =
    R"({"control": {"n": 8000, "conversions": 400}, "treatment": {"n": 8000, "conversions": 470}, "mixture_sd": 0.005})";
inline constexpr std::string_view kRouteList =
    "routes: GET /v1/health, GET|POST /v1/streams, GET /v1/streams/{name}, GET /v1/streams/{name}/next, POST "
    "/v1/streams/{name}/tests, GET /v1/streams/{name}/history?from=STEP&limit=N, GET "
    "/v1/streams/{name}/verify?expect=STEP:HASH, POST /v1/streams/{name}/close, POST "
    "/v1/streams/{name}/launches, POST /v1/streams/{name}/tests/{id}/abandon, GET /v1/streams/{name}/running, GET|POST "
    "/v1/streams/{name}/tests/{id}/looks";

// History pages (docs/http.md "History"): without `limit`, kDefaultPage records; never more than
// kMaxPage in one answer, so one request never holds a whole long history in memory.
inline constexpr std::uint64_t kDefaultPage = 1000;
inline constexpr std::uint64_t kMaxPage = 10000;
inline constexpr std::uint64_t kMaxStep = std::uint64_t{1} << 62;

struct PageQuery {
  std::uint64_t from = 1;
  std::uint64_t limit = kDefaultPage;
};

// `expect=STEP:HASH` or `expect=closed:HASH` anchors in one verify request: at most this many.
inline constexpr std::size_t kMaxAnchors = 64;

// A look's data from a JSON object: "control" and "treatment" objects ({"n", "conversions"} for
// proportions, {"n", "mean", "sd"} for means, both the same kind), optional "mixture_sd" (a number
// > 0). `also` names further keys the caller reads itself (pipe: "event", "id"); any other key is
// refused, naming it, so a misspelt field cannot be dropped silently.
Result<LookData> look_from_json(const nlohmann::json& object, const std::vector<std::string_view>& also = {});

// Equal, comparing every byte whatever the first difference (timing does not reveal the prefix).
bool same_secret(std::string_view a, std::string_view b);
// Equal ignoring ASCII case.
bool iequals(std::string_view a, std::string_view b);
// Parses a request body that must be a JSON object (parse_json_object bounds the depth and never
// echoes more than an excerpt). On failure, the error answer is in `error`.
Result<nlohmann::json> json_body(const http::Request& req, std::string_view example, http::Response& error);
// `from=STEP&limit=N` (either, both or none, each at most once). Errors name the parameter, an
// excerpt of the value and the accepted range.
Result<PageQuery> page_query(std::string_view query);
// "%41" -> "A". nullopt for a bad escape.
std::optional<std::string> percent_decode(std::string_view s);
// `expect=STEP:HASH` or `expect=closed:HASH`, repeatable (at most kMaxAnchors); nothing else.
Result<std::vector<Anchor>> anchor_query(std::string_view query);

}  // namespace alphaledger::routes
