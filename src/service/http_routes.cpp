// The HTTP routes (service/http_routes.hpp; docs/http.md): the route table, then one short
// function per route. Every JSON body comes from alphaledger/forms.hpp.
#include "service/http_routes.hpp"

#include "alphaledger/forms.hpp"
#include "alphaledger/test_log.hpp"
#include "service/http_requests.hpp"
#include "service/json_input.hpp"

namespace alphaledger::routes {

using http::Request;
using http::Response;

const Routes::Route Routes::kRoutes[] = {
    {"GET", "health", &Routes::health},
    {"GET", "streams", &Routes::list_streams},
    {"POST", "streams", &Routes::create_stream},
    {"GET", "streams/*", &Routes::stream_status},
    {"GET", "streams/*/next", &Routes::next_level},
    {"POST", "streams/*/tests", &Routes::decide},
    {"GET", "streams/*/history", &Routes::history},
    {"GET", "streams/*/verify", &Routes::verify},
    {"POST", "streams/*/close", &Routes::close},
    {"POST", "streams/*/launches", &Routes::launch},
    {"POST", "streams/*/tests/?/abandon", &Routes::abandon},
    {"GET", "streams/*/running", &Routes::running},
    {"POST", "streams/*/tests/?/looks", &Routes::look},
    {"GET", "streams/*/tests/?/looks", &Routes::list_looks},
};

namespace {

// The path's segments, each %-decoded (so a stream name may hold an escaped '/'); empty segments
// are skipped. nullopt for a bad escape.
std::optional<std::vector<std::string>> path_segments(std::string_view path) {
  std::vector<std::string> parts;
  while (!path.empty()) {
    if (path.front() == '/') {
      path.remove_prefix(1);
      continue;
    }
    const std::size_t slash = path.find('/');
    auto decoded = percent_decode(path.substr(0, slash));
    if (!decoded) return std::nullopt;
    parts.push_back(std::move(*decoded));
    if (slash == std::string_view::npos) break;
    path.remove_prefix(slash);
  }
  return parts;
}

// Whether `parts` (after "v1") fit `pattern`; the segment under "*" goes to `stream`; "?" stands
// for any one segment (the handler reads it from the path, e.g. a test id).
bool matches(std::string_view pattern, const std::vector<std::string>& parts, std::string& stream) {
  std::size_t k = 1;  // parts[0] is "v1"
  while (!pattern.empty()) {
    const std::size_t slash = pattern.find('/');
    const std::string_view want = pattern.substr(0, slash);
    if (k >= parts.size()) return false;
    if (want == "*")
      stream = parts[k];
    else if (want != "?" && parts[k] != want)
      return false;
    ++k;
    pattern = slash == std::string_view::npos ? std::string_view() : pattern.substr(slash + 1);
  }
  return k == parts.size();
}

}  // namespace

std::optional<Response> Routes::check_token(const Request& req) const {
  if (!options_.token) return std::nullopt;
  const std::string* header = req.header("authorization");
  // RFC 7235: the scheme name is case-insensitive; one or more spaces before the token.
  if (header != nullptr) {
    const std::string_view h(*header);
    const std::size_t space = h.find(' ');
    if (space != std::string_view::npos && iequals(h.substr(0, space), "bearer")) {
      std::string_view token = h.substr(space);
      while (!token.empty() && token.front() == ' ') token.remove_prefix(1);
      if (same_secret(token, *options_.token)) return std::nullopt;
    }
  }
  Response res = error_response(401, "unauthorized",
                                header == nullptr || header->empty()
                                    ? "this server needs an 'Authorization: Bearer <token>' header"
                                    : "the bearer token is not the one this server was started with");
  res.headers.emplace_back("WWW-Authenticate", "Bearer realm=\"alphaledger\"");
  return res;
}

Response Routes::dispatch(const Request& req) {
  auto parts = path_segments(req.path);
  if (!parts)
    return error_response(400, "invalid_request", "the path " + excerpt(req.path) + " has a bad %-escape");
  if (parts->size() >= 2 && (*parts)[0] == "v1") {
    for (const Route& route : kRoutes) {
      std::string stream;
      if (req.method == route.method && matches(route.path, *parts, stream))
        return (this->*route.handler)(req, stream);
    }
  }
  return error_response(
      404, "unknown_route",
      "no route " + excerpt(req.method, 16) + " " + excerpt(req.path) + "; " + std::string(kRouteList));
}

void Routes::note_write(const Error* failure) {
  std::lock_guard<std::mutex> lock(health_mu_);
  if (failure == nullptr) {
    storage_failure_.reset();
  } else if (is_storage_failure(failure->kind)) {
    storage_failure_ = failure->message;
  }
}

// Nothing is cached: a name that does not exist costs nothing after the answer.
Result<StreamInfo> Routes::find_stream(const std::string& name, Response& error) {
  auto s = ledger_.status(name);
  if (s) return s;
  if (s.error().kind == ErrorKind::kNotFound) {
    error = error_response(404, "unknown_stream",
                           "no stream named '" + excerpt(name) + "'; create it with POST /v1/streams");
  } else {
    error = ledger_error(s.error());
  }
  return s.error();
}

namespace {

// 409 for a closed stream asked for a level or given a test.
Response closed_answer(const StreamInfo& s) {
  return error_response(409, "stream_closed",
                        "stream '" + excerpt(s.name) + "' is closed since " +
                            format_timestamp(*s.closed_at_ms) +
                            "; it takes no more tests (its history and verify stay readable)");
}

}  // namespace

// GET /v1/health: 200 {"status":"ok"}, or 503 while the last write to the ledger failed.
Response Routes::health(const Request&, const std::string&) {
  std::lock_guard<std::mutex> lock(health_mu_);
  if (!storage_failure_) return json_answer(200, health_json(std::nullopt));
  return json_answer(503, health_json("the last write to the ledger failed: " + *storage_failure_ +
                                      " (decisions fail until a write succeeds again)"));
}

// GET /v1/streams
Response Routes::list_streams(const Request&, const std::string&) {
  auto list = ledger_.streams();
  if (!list) return ledger_error(list.error());
  return json_answer(200, stream_list_json(*list));
}

// POST /v1/streams
Response Routes::create_stream(const Request& req, const std::string&) {
  Response error;
  auto body = json_body(req, kCreateExample, error);
  if (!body) return error;
  auto parsed = stream_request_from_json(*body);
  if (!parsed) return error_response(400, "invalid_input", parsed.error().message);
  auto config = resolve_config(parsed->spec);
  if (!config) return error_response(400, "invalid_input", config.error().message);
  auto created = ledger_.create_stream_directed(parsed->name, *config, parsed->alternative);
  if (!created) {
    note_write(&created.error());
    return ledger_error(created.error());
  }
  if (created->created) note_write(nullptr);
  return json_answer(created->created ? 201 : 200, stream_json(created->info));
}

// GET /v1/streams/{name}
Response Routes::stream_status(const Request&, const std::string& name) {
  Response error;
  auto s = find_stream(name, error);
  if (!s) return error;
  return json_answer(200, stream_json(*s));
}

// GET /v1/streams/{name}/next
Response Routes::next_level(const Request&, const std::string& name) {
  Response error;
  auto s = find_stream(name, error);
  if (!s) return error;
  if (s->closed_at_ms) return closed_answer(*s);
  return json_answer(200, next_level_json(name, s->tests + 1, s->next_level));
}

// POST /v1/streams/{name}/tests
Response Routes::decide(const Request& req, const std::string& name) {
  Response error;
  auto body = json_body(req, kDecideExample, error);
  if (!body) return error;
  auto input = test_from_json(*body);
  if (!input) return error_response(400, "invalid_input", input.error().message);
  auto s = find_stream(name, error);
  if (!s) return error;
  if (s->closed_at_ms) return closed_answer(*s);
  auto d = queue_.decide(name, input->id, input->p_value, input->e_value);
  if (!d) {
    note_write(&d.error());
    return ledger_error(d.error());
  }
  if (!d->repeat) note_write(nullptr);
  return json_answer(d->repeat ? 200 : 201, decision_json(*d));
}

// GET /v1/streams/{name}/history?from=STEP&limit=N: one page (docs/http.md "History").
Response Routes::history(const Request& req, const std::string& name) {
  auto asked = page_query(req.query);
  if (!asked) return error_response(400, "invalid_input", asked.error().message);
  Response error;
  auto s = find_stream(name, error);
  if (!s) return error;
  auto page = ledger_.history_page(name, asked->from, static_cast<std::size_t>(asked->limit));
  if (!page) return ledger_error(page.error());
  Response res =
      json_answer(200, history_page_json(name, asked->from, asked->limit, *page, rule_name(s->config.kind)));
  if (page->next_step != 0) {
    // Where the next page is, as a path the client can ask for as it is.
    res.headers.emplace_back("X-Next-Page", "/v1/streams/" + name +
                                                "/history?from=" + std::to_string(page->next_step) +
                                                "&limit=" + std::to_string(asked->limit));
  }
  return res;
}

// POST /v1/streams/{name}/close: Ledger::close_stream. 200 with the stream object plus
// closed_now (false: it was closed before, nothing changed) and closing_hash. The body is empty
// or {} (the route takes no fields).
Response Routes::close(const Request& req, const std::string& name) {
  bool blank = true;
  for (char c : req.body) blank = blank && (c == ' ' || c == '\t' || c == '\r' || c == '\n');
  Response error;
  if (!blank) {
    auto body = json_body(req, "an empty body or {}", error);
    if (!body) return error;
    if (!body->empty())
      return error_response(
          400, "invalid_input",
          "close takes no fields, got '" + excerpt(body->begin().key()) + "'; send an empty body or {}");
  }
  if (!find_stream(name, error)) return error;
  auto closing = ledger_.close_stream(name);
  if (!closing) {
    note_write(&closing.error());
    return ledger_error(closing.error());
  }
  if (closing->newly_closed) note_write(nullptr);
  return json_answer(200, stream_closed_json(closing->info, closing->newly_closed, closing->closing_hash));
}

// GET /v1/streams/{name}/verify?expect=STEP:HASH&expect=closed:HASH: Ledger::verify with those
// anchors, as JSON; 200 when ok, 409 when not.
Response Routes::verify(const Request& req, const std::string& name) {
  auto anchors = anchor_query(req.query);
  if (!anchors) return error_response(400, "invalid_input", anchors.error().message);
  Response error;
  if (!find_stream(name, error)) return error;
  auto v = ledger_.verify(name, *anchors);
  if (!v) return ledger_error(v.error());
  return json_answer(v->ok ? 200 : 409, verify_json(name, *v));
}

// POST /v1/streams/{name}/launches with {"id": ...}: Ledger::launch. 201 with launch_json for a
// new launch, 200 with repeat true for an id already running; refusals as decide.
Response Routes::launch(const Request& req, const std::string& name) {
  Response error;
  auto body = json_body(req, kLaunchExample, error);
  if (!body) return error;
  auto it = body->find("id");
  if (it == body->end() || !it->is_string()) {
    return error_response(400, "invalid_input",
                          "the body needs an 'id' string, e.g. " + std::string(kLaunchExample));
  }
  const std::string id = it->get<std::string>();
  if (auto v = validate_test_id(id); !v) return error_response(400, "invalid_input", "id: " + v.error().message);
  auto s = find_stream(name, error);
  if (!s) return error;
  if (s->closed_at_ms) return closed_answer(*s);
  auto l = queue_.launch(name, id);
  if (!l) {
    note_write(&l.error());
    return ledger_error(l.error());
  }
  if (!l->repeat) note_write(nullptr);
  return json_answer(l->repeat ? 200 : 201, launch_json(*l));
}

// POST /v1/streams/{name}/tests/{id}/abandon (empty body): Ledger::abandon. 201 with abandon_json
// when newly abandoned, 200 with repeat true when abandoned before; unknown id 404, decided 409.
Response Routes::abandon(const Request& req, const std::string& name) {
  auto parts = path_segments(req.path);
  if (!parts || parts->size() != 6)
    return error_response(400, "invalid_request", "the path " + excerpt(req.path) + " names no test");
  const std::string& id = (*parts)[4];
  if (auto v = validate_test_id(id); !v)
    return error_response(400, "invalid_input", "test id in the path: " + v.error().message);
  Response error;
  auto s = find_stream(name, error);
  if (!s) return error;
  if (s->closed_at_ms) return closed_answer(*s);
  auto a = queue_.abandon(name, id);
  if (!a) {
    note_write(&a.error());
    return ledger_error(a.error());
  }
  if (!a->repeat) note_write(nullptr);
  return json_answer(a->repeat ? 200 : 201, abandon_json(*a));
}

// GET /v1/streams/{name}/running: {"stream","running":[...]} in launch order.
Response Routes::running(const Request&, const std::string& name) {
  Response error;
  if (!find_stream(name, error)) return error;
  auto r = ledger_.running(name);
  if (!r) return ledger_error(r.error());
  return json_answer(200, running_list_json(name, *r));
}

namespace {

// The test id of a path /v1/streams/{name}/tests/{id}/..., checked; or the error answer.
std::optional<std::string> path_test_id(const Request& req, Response& error) {
  auto parts = path_segments(req.path);
  if (!parts || parts->size() != 6) {
    error = error_response(400, "invalid_request", "the path " + excerpt(req.path) + " names no test");
    return std::nullopt;
  }
  if (auto v = validate_test_id((*parts)[4]); !v) {
    error = error_response(400, "invalid_input", "test id in the path: " + v.error().message);
    return std::nullopt;
  }
  return (*parts)[4];
}

}  // namespace

// POST /v1/streams/{name}/tests/{id}/looks with a look body (kLookExample): Ledger::look. 201
// with look_json for a new look (a stop has decided the test: its decision is inside), 200 with
// repeat true for the same data as the test's last look; refusals as decide (unknown or never
// launched 404, decided or abandoned 409, bad data 400).
Response Routes::look(const Request& req, const std::string& name) {
  Response error;
  auto id = path_test_id(req, error);
  if (!id) return error;
  auto body = json_body(req, kLookExample, error);
  if (!body) return error;
  auto data = look_from_json(*body);
  if (!data) return error_response(400, "invalid_input", data.error().message);
  auto s = find_stream(name, error);
  if (!s) return error;
  if (s->closed_at_ms) return closed_answer(*s);
  auto l = ledger_.look(name, *id, *data);
  if (!l) {
    note_write(&l.error());
    return ledger_error(l.error());
  }
  if (!l->repeat) note_write(nullptr);
  return json_answer(l->repeat ? 200 : 201, look_json(*l));
}

// GET /v1/streams/{name}/tests/{id}/looks: {"stream","id","looks":[...]}, oldest first.
Response Routes::list_looks(const Request& req, const std::string& name) {
  Response error;
  auto id = path_test_id(req, error);
  if (!id) return error;
  if (!find_stream(name, error)) return error;
  auto list = ledger_.looks(name, *id);
  if (!list) return ledger_error(list.error());
  return json_answer(200, look_list_json(name, *id, *list));
}

}  // namespace alphaledger::routes
