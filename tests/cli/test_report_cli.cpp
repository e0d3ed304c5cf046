// HTML reports end to end (docs/reports.md): `report`, `replay --report`, `simulate --report`, each
// rendered by a real browser (Debian's chromium, headless), whose DOM must show every chart drawn
// and no script error, and whose embedded data must equal the CSV output of the same run.
// Without chromium these tests FAIL: scripts/install-deps.sh installs it (CI runs that script).
#include <doctest/doctest.h>
#include <unistd.h>

#include <cmath>
#include <cstdlib>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <algorithm>
#include <map>
#include <nlohmann/json.hpp>
#include <regex>
#include <sstream>
#include <string>
#include <vector>

#include "support/process.hpp"
#include "support/text.hpp"

using alphaledger::test_support::run_alphaledger;
const auto slurp = [](const std::string& path) { return alphaledger::test_support::read_file(path); };
namespace fs = std::filesystem;

namespace {

const std::string kLog = std::string(ALPHALEDGER_SOURCE_DIR) + "/replay_data/larkspur_experiments.csv";
const std::string kTruthLog = std::string(ALPHALEDGER_SOURCE_DIR) + "/replay_data/simulated_stream.csv";

struct Scratch {
  fs::path dir;
  explicit Scratch(const std::string& name) {
    dir = fs::temp_directory_path() / ("alphaledger-report-cli-" + name + "-" + std::to_string(::getpid()));
    fs::remove_all(dir);
    fs::create_directories(dir);
  }
  ~Scratch() { fs::remove_all(dir); }
  std::string operator/(const std::string& name) const { return (dir / name).string(); }
  std::size_t files() const {
    return static_cast<std::size_t>(std::distance(fs::directory_iterator(dir), {}));
  }
};

std::string chromium_path() {
  if (const char* env = std::getenv("ALPHALEDGER_CHROMIUM"); env != nullptr && *env != '\0') return env;
  for (const char* p : {"/usr/bin/chromium", "/usr/bin/chromium-browser"}) {
    if (::access(p, X_OK) == 0) return p;
  }
  return "";
}

// Runs headless chromium on a file with one mode flag; returns its stdout.
std::string run_chromium(const std::string& html, const std::string& mode, const Scratch& s) {
  const std::string chromium = chromium_path();
  REQUIRE_MESSAGE(!chromium.empty(),
                  "chromium is not installed: the report tests need a real browser (scripts/install-deps.sh "
                  "installs Debian's chromium; ALPHALEDGER_CHROMIUM names another binary)");
  const std::string profile = s / ("profile-" + std::to_string(std::rand()));
  const std::string out = s / "chromium.out";
  const std::string command =
      "timeout 180 '" + chromium +
      "' --headless --no-sandbox --disable-gpu --disable-dev-shm-usage --no-first-run "
      "--hide-scrollbars --window-size=1200,2400 --virtual-time-budget=15000 --user-data-dir='" +
      profile + "' " + mode + " 'file://" + html + "' > '" + out + "' 2>/dev/null";
  const int rc = std::system(command.c_str());
  CHECK_MESSAGE(rc == 0, "chromium failed: " << command);
  fs::remove_all(profile);
  return slurp(out);
}

std::string attribute(const std::string& tag, const std::string& name) {
  const std::regex re(name + "=\"([^\"]*)\"");
  std::smatch m;
  return std::regex_search(tag, m, re) ? m[1].str() : std::string();
}

// Renders the page in chromium three ways and checks what a person would see: no script error,
// every chart drawn with ink on its canvas, a screenshot and a PDF.
void check_in_browser(const std::string& html, std::size_t charts, const Scratch& s) {
  const std::string dom = run_chromium(html, "--dump-dom", s);
  REQUIRE_MESSAGE(dom.find("<body") != std::string::npos, "no DOM from chromium");
  const std::string body =
      dom.substr(dom.find("<body"), dom.find('>', dom.find("<body")) - dom.find("<body"));
  CHECK_MESSAGE(attribute(body, "data-errors").empty(),
                "script errors: " << dom.substr(dom.find("report-errors"), 400));
  CHECK(attribute(body, "data-state") == "drawn");
  CHECK(attribute(body, "data-charts") == std::to_string(charts));
  const std::regex canvas_re("<canvas[^>]*>");
  std::size_t seen = 0;
  for (auto it = std::sregex_iterator(dom.begin(), dom.end(), canvas_re); it != std::sregex_iterator();
       ++it) {
    const std::string tag = it->str();
    ++seen;
    CAPTURE(tag);
    CHECK(attribute(tag, "data-drawn") == "yes");
    CHECK(std::atol(attribute(tag, "data-ink").c_str()) > 100);  // painted pixels (sampled 1 in 7)
    CHECK_FALSE(attribute(tag, "aria-label").empty());
  }
  CHECK(seen == charts);

  const std::string png = s / "page.png";
  run_chromium(html, "--screenshot='" + png + "'", s);
  CHECK(fs::exists(png));
  CHECK(slurp(png).rfind("\x89PNG", 0) == 0);
  const std::string pdf = s / "page.pdf";
  run_chromium(html, "--print-to-pdf='" + pdf + "' --no-pdf-header-footer", s);
  CHECK(slurp(pdf).rfind("%PDF", 0) == 0);
}

nlohmann::json embedded_data(const std::string& html_path) {
  const std::string html = slurp(html_path);
  const std::string open = "<script type=\"application/json\" id=\"report-data\">";
  const auto start = html.find(open);
  REQUIRE(start != std::string::npos);
  const auto end = html.find("</script>", start);
  return nlohmann::json::parse(html.substr(start + open.size(), end - start - open.size()));
}

// ---- The data block's column forms (src/harness/report_encode.hpp), decoded independently of the
// page's script, so that the numbers can be compared with the CSV bit for bit. -------------------

std::string base64_decode(const std::string& text) {
  static const std::string kDigits = "ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789+/";
  std::string out;
  std::uint32_t bits = 0;
  int have = 0;
  for (char c : text) {
    if (c == '=') break;
    const auto v = kDigits.find(c);
    REQUIRE(v != std::string::npos);
    bits = (bits << 6) | static_cast<std::uint32_t>(v);
    have += 6;
    if (have >= 8) {
      have -= 8;
      out += static_cast<char>((bits >> have) & 0xFF);
    }
  }
  return out;
}

// Doubles; null entries of a plain array become NaN.
std::vector<double> decode_numbers(const nlohmann::json& c, const std::vector<double>& ref = {}) {
  std::vector<double> out;
  if (c.is_array()) {
    for (const auto& v : c) out.push_back(v.is_null() ? std::nan("") : v.get<double>());
    return out;
  }
  const std::size_t n = c.at("count").get<std::size_t>();
  if (c.contains("same")) return std::vector<double>(n, c["same"].get<double>());
  const std::string bytes = base64_decode(c.at("f64").get<std::string>());
  REQUIRE(bytes.size() % 8 == 0);
  std::vector<double> written(bytes.size() / 8);
  for (std::size_t i = 0; i < written.size(); ++i) {
    std::uint64_t u = 0;
    for (int b = 7; b >= 0; --b) u = (u << 8) | static_cast<unsigned char>(bytes[8 * i + static_cast<std::size_t>(b)]);
    std::memcpy(&written[i], &u, 8);
  }
  if (!c.contains("codes")) return written;
  const std::string codes = c["codes"].get<std::string>();
  double prev = c.at("before").get<double>();
  std::size_t next = 0;
  for (std::size_t i = 0; i < codes.size();) {
    const char code = codes[i++];
    std::size_t times = 0;
    while (i < codes.size() && std::isdigit(static_cast<unsigned char>(codes[i]))) times = 10 * times + (codes[i++] - '0');
    for (std::size_t k = 0; k < std::max<std::size_t>(times, 1); ++k) {
      if (code == 'x') {
        REQUIRE(next < written.size());
        prev = written[next++];
      } else if (code == 'l') {
        REQUIRE(out.size() < ref.size());
        prev = prev - ref[out.size()] / c.at("divisor").get<double>();
      } else {
        REQUIRE(code == 'r');
      }
      out.push_back(prev);
    }
  }
  REQUIRE(out.size() == n);
  REQUIRE(next == written.size());
  return out;
}

std::vector<std::int64_t> decode_integers(const nlohmann::json& c) {
  if (c.is_array()) return c.get<std::vector<std::int64_t>>();
  std::vector<std::int64_t> out;
  std::int64_t v = c.at("first").get<std::int64_t>();
  std::size_t large = 0;
  for (std::size_t i = 0; i < c.at("count").get<std::size_t>(); ++i) {
    if (i > 0 && c.contains("every")) v += c["every"].get<std::int64_t>();
    if (i > 0 && c.contains("diffs")) v += c["diffs"].at(i - 1).get<std::int64_t>();
    if (i > 0 && c.contains("small_diffs")) {
      static const std::string kDigits = "ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789+/";
      const auto digit = kDigits.find(c["small_diffs"].get<std::string>().at(i - 1));
      v += digit == 63 ? c.at("large").at(large++).get<std::int64_t>() : static_cast<std::int64_t>(digit);
    }
    out.push_back(v);
  }
  return out;
}

std::vector<int> decode_flags(const nlohmann::json& c) {
  if (c.is_array()) return c.get<std::vector<int>>();
  std::vector<int> out(c.at("count").get<std::size_t>(), 0);
  for (const auto& i : c.at("set")) out.at(i.get<std::size_t>()) = 1;
  return out;
}

// Bytes of the first `units` UTF-16 units of UTF-8 text.
std::size_t utf16_prefix_bytes(const std::string& s, std::size_t units) {
  std::size_t i = 0;
  while (units > 0 && i < s.size()) {
    const auto b = static_cast<unsigned char>(s[i]);
    const std::size_t len = b < 0x80 ? 1 : b >= 0xF0 ? 4 : b >= 0xE0 ? 3 : 2;
    units -= len == 4 ? std::min<std::size_t>(units, 2) : 1;
    i += len;
  }
  return i;
}

std::vector<std::string> decode_texts(const nlohmann::json& c) {
  if (c.is_array()) return c.get<std::vector<std::string>>();
  std::vector<std::string> out;
  const std::size_t n = c.at("count").get<std::size_t>();
  if (c.contains("values")) {
    static const std::string kDigits = "ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789+/";
    const std::string index = c.at("index").get<std::string>();
    for (std::size_t i = 0; i < n; ++i) out.push_back(c["values"].at(kDigits.find(index.at(i))).get<std::string>());
    return out;
  }
  const std::string front = c.at("front").get<std::string>();
  std::string prev;
  for (std::size_t pos = 0; out.size() < n;) {
    REQUIRE(pos + 2 <= front.size());
    const auto shared = static_cast<std::size_t>(front[pos] - '0');
    const auto rest = static_cast<std::size_t>(front[pos + 1] - '0');
    const std::string tail = front.substr(pos + 2);
    const std::size_t rest_bytes = utf16_prefix_bytes(tail, rest);
    prev = prev.substr(0, utf16_prefix_bytes(prev, shared)) + tail.substr(0, rest_bytes);
    out.push_back(prev);
    pos += 2 + rest_bytes;
  }
  REQUIRE(out.size() == n);
  return out;
}

// The rows of the table with this caption in a dumped DOM: the text of each cell.
std::vector<std::vector<std::string>> dom_table(const std::string& dom, const std::string& caption) {
  std::vector<std::vector<std::string>> rows;
  const auto at = dom.find("<caption>" + caption + "</caption>");
  REQUIRE_MESSAGE(at != std::string::npos, "no table '" << caption << "' in the page");
  const auto body = dom.find("<tbody>", at);
  const auto end = dom.find("</tbody>", body);
  const std::string text = dom.substr(body, end - body);
  const std::regex row_re("<tr>(.*?)</tr>"), cell_re("<td[^>]*>([^<]*)</td>");
  for (auto r = std::sregex_iterator(text.begin(), text.end(), row_re); r != std::sregex_iterator(); ++r) {
    const std::string row = (*r)[1].str();
    rows.emplace_back();
    for (auto c = std::sregex_iterator(row.begin(), row.end(), cell_re); c != std::sregex_iterator(); ++c) {
      rows.back().push_back((*c)[1].str());
    }
  }
  return rows;
}

// A CSV without quoted fields (the ids of these logs have none): header name -> column per row.
std::vector<std::map<std::string, std::string>> parse_csv(const std::string& text) {
  std::vector<std::map<std::string, std::string>> rows;
  std::istringstream in(text);
  std::string line;
  std::vector<std::string> header;
  auto split = [](const std::string& l) {
    std::vector<std::string> out;
    std::string cell;
    std::istringstream cells(l);
    while (std::getline(cells, cell, ',')) out.push_back(cell);
    if (!l.empty() && l.back() == ',') out.emplace_back();
    return out;
  };
  std::getline(in, line);
  header = split(line);
  while (std::getline(in, line)) {
    const auto cells = split(line);
    REQUIRE(cells.size() == header.size());
    std::map<std::string, std::string> row;
    for (std::size_t i = 0; i < header.size(); ++i) row[header[i]] = cells[i];
    rows.push_back(row);
  }
  return rows;
}

double num(const std::string& text) { return std::strtod(text.c_str(), nullptr); }

// A JSON number (or null) against a CSV field (empty for null): the same double.
void check_same(const nlohmann::json& j, const std::string& csv) {
  CAPTURE(csv);
  if (csv.empty()) {
    CHECK(j.is_null());
  } else {
    REQUIRE(j.is_number());
    CHECK(j.get<double>() == num(csv));
  }
}

// A decoded double (NaN for null) against a CSV field (empty for null): the same double.
void check_same(double v, const std::string& csv) {
  CAPTURE(csv);
  if (csv.empty()) {
    CHECK(std::isnan(v));
  } else {
    CHECK(v == num(csv));
  }
}

}  // namespace

TEST_CASE("ReportCli: a stream report holds the ledger's history and draws in a browser") {
  Scratch s("stream");
  const std::string ledger = s / "ledger";
  REQUIRE(run_alphaledger({"--ledger", ledger, "new", "larkspur", "--rule", "saffron"}).exit_code == 0);
  REQUIRE(run_alphaledger({"--ledger", ledger, "decide", "larkspur", "--file", kLog}).exit_code == 0);
  const std::string html = s / "stream.html";
  const auto r = run_alphaledger({"--ledger", ledger, "report", "larkspur", "-o", html});
  REQUIRE_MESSAGE(r.exit_code == 0, r.err);
  const auto history = run_alphaledger({"--ledger", ledger, "history", "larkspur"});
  REQUIRE(history.exit_code == 0);

  const auto rows = parse_csv(history.out);
  const auto data = embedded_data(html);
  CHECK(data["format"] == 2);
  const auto& d = data["decisions"];
  const auto step = decode_integers(d["step"]);
  const auto id = decode_texts(d["id"]);
  const auto p = decode_numbers(d["p_value"]);
  const auto level = decode_numbers(d["level"]);
  const auto rejected = decode_flags(d["rejected"]);
  const auto wealth = decode_numbers(d["wealth"], level);
  CHECK(d["wealth"].contains("codes"));  // saffron's wealth follows its levels: the compact form is used
  REQUIRE(rows.size() == 420);
  REQUIRE(step.size() == rows.size());
  REQUIRE(id.size() == rows.size());
  REQUIRE(wealth.size() == rows.size());
  for (std::size_t i = 0; i < rows.size(); ++i) {
    CAPTURE(i);
    CHECK(step[i] == std::stoll(rows[i].at("step")));
    CHECK(id[i] == rows[i].at("id"));
    check_same(p[i], rows[i].at("p_value"));
    check_same(level[i], rows[i].at("level"));
    CHECK(rejected[i] == std::stoi(rows[i].at("rejected")));
    check_same(wealth[i], rows[i].at("wealth"));
  }
  // Every test decided at once: nothing was ever running.
  const auto reserved = decode_numbers(data["reserved_wealth"]);
  REQUIRE(reserved.size() == rows.size());
  for (const double v : reserved) CHECK(v == 0.0);
  CHECK(decode_texts(data["running"]["id"]).empty());
  CHECK(slurp(html).find("pre-registered analysis plan") != std::string::npos);
  check_in_browser(html, 3, s);
  // The page's own decoding gives the same numbers: its table of decisions against the CSV.
  const auto table = dom_table(run_chromium(html, "--dump-dom", s), "Decisions of stream larkspur");
  REQUIRE(table.size() == rows.size());
  for (std::size_t i = 0; i < rows.size(); ++i) {
    CAPTURE(i);
    REQUIRE(table[i].size() == 9);  // step, id, p_value, level, decision, wealth, reserved, discoveries, decided_at
    CHECK(table[i][0] == rows[i].at("step"));
    CHECK(table[i][1] == rows[i].at("id"));
    CHECK(num(table[i][2]) == num(rows[i].at("p_value")));
    CHECK(num(table[i][3]) == num(rows[i].at("level")));
    CHECK(num(table[i][5]) == num(rows[i].at("wealth")));
  }
}

TEST_CASE("ReportCli: a stream with overlapping launches shows reserved wealth and its running tests") {
  // The reference numbers are the ledger's own reservations (launch --json) and status; the sums
  // follow from docs/ledger.md "Launch-time levels" (a running test holds its level), no outside source.
  Scratch s("launches");
  const std::string ledger = s / "ledger";
  const auto json = [&](std::vector<std::string> args) {
    args.insert(args.begin(), {"--ledger", ledger, "--json"});
    const auto r = run_alphaledger(args);
    REQUIRE_MESSAGE(r.exit_code == 0, r.err);
    return nlohmann::json::parse(r.out);
  };
  REQUIRE(run_alphaledger({"--ledger", ledger, "new", "t", "--rule", "lord++"}).exit_code == 0);
  json({"launch", "t", "--id", "a"});
  const double lb = json({"launch", "t", "--id", "b"})["level"].get<double>();
  json({"decide", "t", "--id", "a", "--p", "0.00001"});  // reserved after: b
  const double lc = json({"launch", "t", "--id", "c"})["level"].get<double>();
  json({"decide", "t", "--id", "d", "--p", "0.5"});      // launched and decided at once: b + c
  json({"decide", "t", "--id", "b", "--p", "0.7"});      // c
  const std::string html = s / "launches.html";
  const auto r = run_alphaledger({"--ledger", ledger, "report", "t", "-o", html});
  REQUIRE_MESSAGE(r.exit_code == 0, r.err);
  const auto data = embedded_data(html);
  REQUIRE(decode_texts(data["decisions"]["id"]) == std::vector<std::string>{"a", "d", "b"});
  const auto reserved = decode_numbers(data["reserved_wealth"]);
  REQUIRE(reserved.size() == 3);
  CHECK(reserved[0] == lb);
  CHECK(reserved[1] == lb + lc);
  CHECK(reserved[2] == lc);
  CHECK(decode_texts(data["running"]["id"]) == std::vector<std::string>{"c"});
  CHECK(decode_numbers(data["running"]["level"]).at(0) == lc);
  CHECK(data["reserved"].get<double>() == json({"status", "t"})["reserved"].get<double>());
  const std::string page = slurp(html);
  CHECK(page.find("id=\"running-table\"") != std::string::npos);
  check_in_browser(html, 3, s);
  const std::string dom = run_chromium(html, "--dump-dom", s);
  CHECK(dom.find("Running tests of stream t") != std::string::npos);  // the running table was drawn
}

TEST_CASE("ReportCli: a replay report equals replay's CSV, with FDP and power, and draws in a browser") {
  Scratch s("replay");
  const std::string html = s / "replay.html";
  const auto r =
      run_alphaledger({"replay", kTruthLog, "--rules", "lord++,saffron,addis,bh", "--report", html});
  REQUIRE_MESSAGE(r.exit_code == 0, r.err);
  const auto summary =
      run_alphaledger({"replay", kTruthLog, "--rules", "lord++,saffron,addis,bh", "--summary"});
  REQUIRE(summary.exit_code == 0);
  const auto data = embedded_data(html);
  const auto rows = parse_csv(r.out);
  REQUIRE(data["rules"].size() == 4);
  const std::size_t n = data["tests"].get<std::size_t>();
  REQUIRE(rows.size() == 4 * n);
  const auto ids = decode_texts(data["input"]["id"]);
  const auto p = decode_numbers(data["input"]["p_value"]);
  REQUIRE(ids.size() == n);
  REQUIRE(p.size() == n);
  std::vector<std::vector<double>> levels;
  std::vector<std::vector<int>> rejected;
  for (const auto& rule : data["rules"]) {
    levels.push_back(decode_numbers(rule["level"]));
    rejected.push_back(decode_flags(rule["rejected"]));
    REQUIRE(levels.back().size() == n);
    REQUIRE(rejected.back().size() == n);
  }
  CHECK(data["rules"][3]["level"].contains("same"));  // bh: one level for every test, written once
  for (std::size_t k = 0; k < rows.size(); ++k) {
    const auto& rule = data["rules"][k / n];
    const std::size_t i = k % n;
    CAPTURE(k);
    CHECK(rule["rule"] == rows[k].at("rule"));
    CHECK(ids[i] == rows[k].at("id"));
    check_same(p[i], rows[k].at("p_value"));
    check_same(levels[k / n][i], rows[k].at("level"));
    CHECK(rejected[k / n][i] == std::stoi(rows[k].at("rejected")));
  }
  const auto sums = parse_csv(summary.out);
  REQUIRE(sums.size() == 4);
  for (std::size_t k = 0; k < 4; ++k) {
    const auto& got = data["rules"][k]["summary"];
    CHECK(got["rejections"].get<std::uint64_t>() == std::stoull(sums[k].at("rejections")));
    check_same(got["false_discoveries"], sums[k].at("false_discoveries"));
    check_same(got["fdp"], sums[k].at("fdp"));
    check_same(got["power"], sums[k].at("power"));
  }
  CHECK(data["has_truth"] == true);
  CHECK(data["hindsight"] == "bh");
  check_in_browser(html, 2, s);
  // The page's own decoding: its per-test table (id, line, p_value, finished_at, is_null, then a
  // level and a decision per rule) against the CSV.
  const auto table = dom_table(run_chromium(html, "--dump-dom", s), "Per test, in the order decided");
  REQUIRE(table.size() == std::min<std::size_t>(n, 1000));
  for (std::size_t i = 0; i < table.size(); ++i) {
    CAPTURE(i);
    REQUIRE(table[i].size() == 5 + 2 * 4);
    CHECK(table[i][0] == ids[i]);
    CHECK(num(table[i][2]) == p[i]);
    for (std::size_t k = 0; k < 4; ++k) {
      CHECK(num(table[i][5 + 2 * k]) == num(rows[k * n + i].at("level")));
      CHECK((table[i][6 + 2 * k] == "R") == (rows[k * n + i].at("rejected") == "1"));
    }
  }
}

TEST_CASE("ReportCli: replay without bh adds the hindsight answer to the report only") {
  Scratch s("replay-nobh");
  const std::string html = s / "r.html";
  const auto r = run_alphaledger({"replay", kLog, "--rules", "lord++", "--report", html});
  REQUIRE_MESSAGE(r.exit_code == 0, r.err);
  CHECK(r.out.find("\nbh,") == std::string::npos);  // the CSV is replay's, unchanged
  const auto data = embedded_data(html);
  REQUIRE(data["rules"].size() == 2);
  CHECK(data["rules"][1]["rule"] == "bh");
  CHECK(data["rules"][1]["added_for_report"] == true);

  // The log's own other columns are kept, matched by line although replay reorders by finished_at.
  std::vector<std::string> lines;
  {
    std::istringstream in(slurp(kLog));
    for (std::string l; std::getline(in, l);) lines.push_back(l);
  }
  const auto& input = data["input"];
  REQUIRE(input["columns"].contains("team"));
  REQUIRE(input["columns"].contains("metric"));
  CHECK_FALSE(input["columns"].contains("p_value"));
  const auto ids = decode_texts(input["id"]);
  const auto line_of = decode_integers(input["line"]);
  const auto team = decode_texts(input["columns"]["team"]);
  const auto metric = decode_texts(input["columns"]["metric"]);
  REQUIRE(line_of.size() == ids.size());
  REQUIRE(team.size() == ids.size());
  REQUIRE(metric.size() == ids.size());
  std::size_t reordered = 0;
  for (std::size_t i = 0; i < ids.size(); ++i) {
    const auto line = static_cast<std::size_t>(line_of[i]);
    reordered += line != i + 2 ? 1 : 0;
    const std::string expect = ids[i] + "," + team[i] + "," + metric[i] + ",";
    CHECK(lines[line - 1].rfind(expect, 0) == 0);
  }
  CHECK(reordered > 0);  // the file is not in time order, so the matching by line was exercised

  // From standard input the log cannot be read twice: no other columns, still a report.
  const std::string from_stdin = s / "stdin.html";
  const auto piped = run_alphaledger({"replay", "-", "--format", "csv", "--report", from_stdin}, slurp(kLog));
  REQUIRE_MESSAGE(piped.exit_code == 0, piped.err);
  CHECK(embedded_data(from_stdin)["input"]["columns"].empty());
}

TEST_CASE("ReportCli: a simulation sweep's CSV gains the swept column; its report equals it and draws") {
  Scratch s("simulate");
  const std::string html = s / "sim.html";
  const std::vector<std::string> args = {
      "simulate",           "--rules",      "lord++,saffron,bh", "--tests", "300", "--runs", "20",
      "--nonnull-fraction", "0.05,0.2,0.5", "--threads",         "2"};
  auto with_report = args;
  with_report.insert(with_report.end(), {"--report", html});
  const auto r = run_alphaledger(with_report);
  REQUIRE_MESSAGE(r.exit_code == 0, r.err);
  CHECK(r.out.rfind("nonnull_fraction,rule,runs,tests,mean_rejections,fdr,fdr_se,mfdr,power,power_se,fwer\n",
                    0) == 0);
  CHECK(run_alphaledger(args).out == r.out);  // --report changes nothing on stdout
  const auto rows = parse_csv(r.out);
  const auto data = embedded_data(html);
  REQUIRE(rows.size() == 9);
  REQUIRE(data["rows"].size() == 9);
  CHECK(data["swept"] == "nonnull_fraction");
  for (std::size_t k = 0; k < rows.size(); ++k) {
    const auto& j = data["rows"][k];
    CAPTURE(k);
    check_same(j["value"], rows[k].at("nonnull_fraction"));
    CHECK(j["rule"] == rows[k].at("rule"));
    for (const char* key : {"mean_rejections", "fdr", "fdr_se", "mfdr", "power", "power_se", "fwer"}) {
      check_same(j[key], rows[k].at(key));
    }
  }
  // Each value of the sweep gives the same rows as a run with that single value (same seed).
  const auto single = run_alphaledger({"simulate", "--rules", "lord++,saffron,bh", "--tests", "300", "--runs",
                                       "20", "--nonnull-fraction", "0.2", "--threads", "1"});
  const auto single_rows = parse_csv(single.out);
  REQUIRE(single_rows.size() == 3);
  for (std::size_t k = 0; k < 3; ++k) {
    CHECK(single_rows[k].at("fdr") == rows[3 + k].at("fdr"));
    CHECK(single_rows[k].at("power") == rows[3 + k].at("power"));
  }
  check_in_browser(html, 2, s);
}

TEST_CASE("ReportCli: a mean-duration sweep is labelled and the settings list duration and looks") {
  Scratch s("duration");
  const std::string html = s / "duration.html";
  const auto r = run_alphaledger({"simulate", "--rules", "lord++", "--tests", "50", "--runs", "20",
                                  "--mean-duration", "0,3", "--peeking", "4", "--report", html});
  REQUIRE_MESSAGE(r.exit_code == 0, r.err);
  CHECK(r.out.rfind("mean_duration,rule,", 0) == 0);
  const auto data = embedded_data(html);
  CHECK(data["swept"] == "mean_duration");
  CHECK(data["swept_label"] == "mean duration (launches between launch and finish)");
  CHECK(data["model"]["peeking_looks"] == 4);
  const std::string page = slurp(html);
  CHECK(page.find("<th scope=\"row\">mean duration</th>") != std::string::npos);
  CHECK(page.find("4 looks per test") != std::string::npos);
}

TEST_CASE("ReportCli: a single-setting simulation keeps today's CSV and still reports") {
  Scratch s("simulate-one");
  const std::string html = s / "one.html";
  const auto r = run_alphaledger(
      {"simulate", "--rules", "lord++", "--tests", "100", "--runs", "5", "--effect", "2", "--report", html});
  REQUIRE_MESSAGE(r.exit_code == 0, r.err);
  CHECK(r.out.rfind("rule,runs,tests,", 0) == 0);
  const auto data = embedded_data(html);
  CHECK(data["swept"].is_null());
  CHECK(data["rows"].size() == 1);
}

TEST_CASE("ReportCli: bad output paths, unknown streams and bad sweeps fail clearly and leave no file") {
  Scratch s("errors");
  const std::string ledger = s / "ledger";
  REQUIRE(run_alphaledger({"--ledger", ledger, "new", "one", "--rule", "lord++"}).exit_code == 0);
  const std::size_t before = s.files();

  const auto unknown = run_alphaledger({"--ledger", ledger, "report", "nope", "-o", s / "x.html"});
  CHECK(unknown.exit_code == 3);
  CHECK(unknown.err.find("nope") != std::string::npos);
  CHECK_FALSE(fs::exists(s / "x.html"));

  const auto no_ledger = run_alphaledger({"--ledger", s / "missing", "report", "one", "-o", s / "x.html"});
  CHECK(no_ledger.exit_code == 3);

  const auto folder = run_alphaledger({"--ledger", ledger, "report", "one", "-o", s / "no-such" + "/x.html"});
  CHECK(folder.exit_code == 2);
  CHECK(folder.err.find("-o") != std::string::npos);
  CHECK(folder.err.find("does not exist") != std::string::npos);

  const auto is_dir = run_alphaledger({"replay", kLog, "--report", s.dir.string()});
  CHECK(is_dir.exit_code == 2);
  CHECK(is_dir.err.find("--report") != std::string::npos);
  CHECK(is_dir.out.empty());  // refused before any output

  const auto bad = run_alphaledger({"simulate", "--tests", "10", "--runs", "2", "--nonnull-fraction",
                                    "0.1,abc", "--report", s / "y.html"});
  CHECK(bad.exit_code == 2);
  CHECK(bad.err.find("--nonnull-fraction must be a finite number or a comma-separated list") !=
        std::string::npos);
  const auto range = run_alphaledger({"simulate", "--tests", "10", "--runs", "2", "--nonnull-fraction",
                                      "0.1,1.5", "--report", s / "y.html"});
  CHECK(range.exit_code == 2);
  CHECK(range.err.find("--nonnull-fraction must be in [0, 1], got 1.5") != std::string::npos);
  const auto repeat = run_alphaledger({"simulate", "--tests", "10", "--runs", "2", "--effect", "1,2,1"});
  CHECK(repeat.exit_code == 2);
  CHECK(repeat.err.find("value 3 of '1,2,1' repeats") != std::string::npos);
  const auto both = run_alphaledger(
      {"simulate", "--tests", "10", "--runs", "2", "--effect", "1,2", "--nonnull-fraction", "0.1,0.2"});
  CHECK(both.exit_code == 2);
  CHECK(both.err.find("one parameter at a time") != std::string::npos);
  const auto empty_item = run_alphaledger({"simulate", "--tests", "10", "--runs", "2", "--effect", "1,,2"});
  CHECK(empty_item.exit_code == 2);

  CHECK(s.files() == before);  // no report and no temporary file was left behind
}

TEST_CASE("ReportCli: the browser check sees a script error and a chart that did not draw") {
  // The marks the other tests rely on must be able to fail: the same page with a script that
  // throws after the charts and one that breaks before them.
  Scratch s("negative");
  const std::string good = s / "good.html";
  REQUIRE(run_alphaledger({"replay", kTruthLog, "--rules", "lord++", "--report", good}).exit_code == 0);
  const std::string page = slurp(good);
  const auto end = page.rfind("</body>");
  REQUIRE(end != std::string::npos);
  const std::string thrown = s / "thrown.html";
  {
    std::ofstream(thrown) << page.substr(0, end) << "<script>throw new Error('boom');</script>\n"
                          << page.substr(end);
  }
  const std::string dom = run_chromium(thrown, "--dump-dom", s);
  const std::string body =
      dom.substr(dom.find("<body"), dom.find('>', dom.find("<body")) - dom.find("<body"));
  CHECK(attribute(body, "data-errors") == "1");
  CHECK(dom.find("hit a script error, so some charts may be missing: Uncaught Error: boom") !=
        std::string::npos);

  // Without Chart.js the drawing script fails: an error, and no chart is marked drawn.
  const std::string broken = s / "broken.html";
  const auto chart_start = page.find("<script>\n/*!\n * Chart.js");
  REQUIRE(chart_start != std::string::npos);
  const auto chart_end = page.find("</script>", chart_start);
  { std::ofstream(broken) << page.substr(0, chart_start) << page.substr(chart_end + 9); }
  const std::string dom2 = run_chromium(broken, "--dump-dom", s);
  const std::string body2 =
      dom2.substr(dom2.find("<body"), dom2.find('>', dom2.find("<body")) - dom2.find("<body"));
  CHECK_FALSE(attribute(body2, "data-errors").empty());
  CHECK(attribute(body2, "data-state") == "loading");
  CHECK(dom2.find("data-drawn=") == std::string::npos);
}

namespace {
std::string firefox_path() {
  if (const char* env = std::getenv("ALPHALEDGER_FIREFOX"); env != nullptr && *env != '\0') return env;
  for (const char* p : {"/usr/bin/firefox-esr", "/usr/bin/firefox"}) {
    if (::access(p, X_OK) == 0) return p;
  }
  return "";
}

std::string base64_encode(const std::string& bytes) {
  static const char kDigits[] = "ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789+/";
  std::string out;
  for (std::size_t i = 0; i < bytes.size(); i += 3) {
    std::uint32_t v = static_cast<std::uint32_t>(static_cast<unsigned char>(bytes[i])) << 16;
    if (i + 1 < bytes.size()) v |= static_cast<std::uint32_t>(static_cast<unsigned char>(bytes[i + 1])) << 8;
    if (i + 2 < bytes.size()) v |= static_cast<unsigned char>(bytes[i + 2]);
    out += kDigits[(v >> 18) & 63];
    out += kDigits[(v >> 12) & 63];
    out += i + 1 < bytes.size() ? kDigits[(v >> 6) & 63] : '=';
    out += i + 2 < bytes.size() ? kDigits[v & 63] : '=';
  }
  return out;
}

// What a screenshot shows, counted in pixels: the error banner's red (#c00000, report_assets.hpp)
// and the blue every report's charts draw with (#0072B2, the first colour of the palette, used
// nowhere else on the page). The PNG is decoded by headless Chromium: a small page holds it as a
// data: URL, draws it on a canvas and writes the counts into <body>.
struct ScreenshotColours {
  long width = -1;
  long banner = -1;
  long chart = -1;
};

ScreenshotColours screenshot_colours(const std::string& png, const Scratch& s) {
  const std::string probe = s / "probe.html";
  std::ofstream(probe) << "<!DOCTYPE html><html><body><img id=\"shot\" src=\"data:image/png;base64,"
                       << base64_encode(slurp(png)) << R"(">
<script>
var img = document.getElementById('shot');
function count() {
  var c = document.createElement('canvas');
  c.width = img.naturalWidth; c.height = img.naturalHeight;
  var g = c.getContext('2d');
  g.drawImage(img, 0, 0);
  var d = g.getImageData(0, 0, c.width, c.height).data, banner = 0, chart = 0;
  function near(i, r, gr, b) { return Math.abs(d[i] - r) <= 12 && Math.abs(d[i + 1] - gr) <= 12 && Math.abs(d[i + 2] - b) <= 12; }
  for (var i = 0; i < d.length; i += 4) {
    if (near(i, 0xc0, 0x00, 0x00)) banner++;
    if (near(i, 0x00, 0x72, 0xb2)) chart++;
  }
  document.body.setAttribute('data-width', String(c.width));
  document.body.setAttribute('data-banner', String(banner));
  document.body.setAttribute('data-chart', String(chart));
}
if (img.complete) count(); else img.onload = count;
</script></body></html>
)";
  const std::string dom = run_chromium(probe, "--dump-dom", s);
  const auto at = dom.find("<body");
  REQUIRE(at != std::string::npos);
  const std::string body = dom.substr(at, dom.find('>', at) - at);
  ScreenshotColours c;
  const auto read = [&](const char* name) {
    const std::string v = attribute(body, name);
    return v.empty() ? -1L : std::atol(v.c_str());
  };
  c.width = read("data-width");
  c.banner = read("data-banner");
  c.chart = read("data-chart");
  return c;
}

// A screenshot of `html` by headless Firefox, at 1200 x 2400.
std::string firefox_screenshot(const std::string& firefox, const std::string& html, const std::string& name,
                               const Scratch& s) {
  const std::string png = s / (name + ".png");
  const std::string home = s / ("home-" + name);  // a profile of its own, removed with the folder
  fs::create_directories(home);
  const std::string command = "HOME='" + home + "' timeout 180 '" + firefox +
                              "' --headless --window-size=1200,2400 --screenshot '" + png + "' 'file://" + html +
                              "' > /dev/null 2>&1";
  const int rc = std::system(command.c_str());
  CHECK_MESSAGE(rc == 0, "firefox failed: " << command);
  const std::string image = slurp(png);
  REQUIRE(image.size() > 8);
  CHECK(image.compare(0, 8, "\x89PNG\r\n\x1a\n") == 0);
  return png;
}

// A copy of a report with a script that throws after the page's own scripts.
std::string with_script_error(const std::string& html, const std::string& copy) {
  const std::string page = slurp(html);
  const auto end = page.rfind("</body>");
  REQUIRE(end != std::string::npos);
  std::ofstream(copy) << page.substr(0, end) << "<script>throw new Error('boom');</script>\n" << page.substr(end);
  return copy;
}

}  // namespace

TEST_CASE("ReportCli: each report type renders in headless Firefox, charts drawn and no error banner") {
  // Firefox headless has no DOM dump: its screenshot of each page must show the charts' colour and
  // not the error banner's, and a copy of a page with a script error must show the banner (so the
  // check can fail). Skipped, with a message, when Firefox is not installed.
  const std::string firefox = firefox_path();
  if (firefox.empty()) {
    MESSAGE("firefox is not installed: skipped (scripts/install-deps.sh installs Debian's firefox-esr; "
            "ALPHALEDGER_FIREFOX names another binary)");
    return;
  }
  Scratch s("firefox");
  const std::string ledger = s / "ledger";
  REQUIRE(run_alphaledger({"--ledger", ledger, "new", "larkspur", "--rule", "lord++"}).exit_code == 0);
  REQUIRE(run_alphaledger({"--ledger", ledger, "decide", "larkspur", "--file", kLog}).exit_code == 0);
  REQUIRE(run_alphaledger({"--ledger", ledger, "report", "larkspur", "-o", s / "stream.html"}).exit_code == 0);
  REQUIRE(run_alphaledger({"replay", kTruthLog, "--rules", "lord++,bh", "--report", s / "replay.html"}).exit_code == 0);
  REQUIRE(run_alphaledger({"simulate", "--rules", "lord++,saffron", "--tests", "100", "--runs", "20",
                           "--nonnull-fraction", "0.1,0.3", "--report", s / "sim.html"})
              .exit_code == 0);
  for (const std::string name : {"stream", "replay", "sim"}) {
    CAPTURE(name);
    const auto c = screenshot_colours(firefox_screenshot(firefox, s / (name + ".html"), name, s), s);
    CHECK(c.width == 1200);
    CHECK(c.banner == 0);    // no script error
    CHECK(c.chart > 1000);   // the charts drew (a page without them has none of this blue)
  }
  // The same check sees a script error: the banner fills a strip across the top of the page.
  const std::string thrown = with_script_error(s / "replay.html", s / "thrown.html");
  const auto bad = screenshot_colours(firefox_screenshot(firefox, thrown, "thrown", s), s);
  CHECK(bad.banner > 20000);
}

TEST_CASE("ReportCli: a Chromium screenshot shows the error banner for a page with a script error") {
  Scratch s("banner");
  const std::string good = s / "good.html";
  REQUIRE(run_alphaledger({"replay", kTruthLog, "--rules", "lord++", "--report", good}).exit_code == 0);
  const std::string png = s / "good.png";
  run_chromium(good, "--screenshot='" + png + "'", s);
  const auto ok = screenshot_colours(png, s);
  CHECK(ok.banner == 0);
  CHECK(ok.chart > 1000);
  const std::string thrown = with_script_error(good, s / "thrown.html");
  const std::string bad_png = s / "thrown.png";
  run_chromium(thrown, "--screenshot='" + bad_png + "'", s);
  CHECK(screenshot_colours(bad_png, s).banner > 20000);
}
