// HTML reports end to end (docs/reports.md): `report`, `replay --report`, `simulate --report`, each
// rendered by a real browser (Debian's chromium, headless), whose DOM must show every chart drawn
// and no script error, and whose embedded data must equal the CSV output of the same run.
// Without chromium these tests FAIL: scripts/install-deps.sh installs it (CI runs that script).
#include <doctest/doctest.h>
#include <unistd.h>

#include <cstdlib>
#include <filesystem>
#include <fstream>
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
  const auto& d = data["decisions"];
  REQUIRE(rows.size() == 420);
  REQUIRE(d["step"].size() == rows.size());
  for (std::size_t i = 0; i < rows.size(); ++i) {
    CAPTURE(i);
    CHECK(d["step"][i].get<std::uint64_t>() == std::stoull(rows[i].at("step")));
    CHECK(d["id"][i] == rows[i].at("id"));
    check_same(d["p_value"][i], rows[i].at("p_value"));
    check_same(d["level"][i], rows[i].at("level"));
    CHECK(d["rejected"][i] == std::stoi(rows[i].at("rejected")));
    check_same(d["wealth"][i], rows[i].at("wealth"));
  }
  // Every test decided at once: nothing was ever running.
  REQUIRE(data["reserved_wealth"].size() == rows.size());
  for (const auto& v : data["reserved_wealth"]) CHECK(v.get<double>() == 0.0);
  CHECK(data["running"]["id"].empty());
  CHECK(slurp(html).find("pre-registered analysis plan") != std::string::npos);
  check_in_browser(html, 3, s);
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
  REQUIRE(data["decisions"]["id"] == nlohmann::json::array({"a", "d", "b"}));
  const auto& reserved = data["reserved_wealth"];
  REQUIRE(reserved.size() == 3);
  CHECK(reserved[0].get<double>() == lb);
  CHECK(reserved[1].get<double>() == lb + lc);
  CHECK(reserved[2].get<double>() == lc);
  CHECK(data["running"]["id"] == nlohmann::json::array({"c"}));
  CHECK(data["running"]["level"][0].get<double>() == lc);
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
  for (std::size_t k = 0; k < rows.size(); ++k) {
    const auto& rule = data["rules"][k / n];
    const std::size_t i = k % n;
    CAPTURE(k);
    CHECK(rule["rule"] == rows[k].at("rule"));
    CHECK(data["input"]["id"][i] == rows[k].at("id"));
    check_same(data["input"]["p_value"][i], rows[k].at("p_value"));
    check_same(rule["level"][i], rows[k].at("level"));
    CHECK(rule["rejected"][i] == std::stoi(rows[k].at("rejected")));
    if (rule.contains("wealth")) check_same(rule["wealth"][i], rows[k].at("wealth"));
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
  std::size_t reordered = 0;
  for (std::size_t i = 0; i < input["id"].size(); ++i) {
    const std::size_t line = input["line"][i].get<std::size_t>();
    reordered += line != i + 2 ? 1 : 0;
    const std::string expect = input["id"][i].get<std::string>() + "," +
                               input["columns"]["team"][i].get<std::string>() + "," +
                               input["columns"]["metric"][i].get<std::string>() + ",";
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
}  // namespace

TEST_CASE("ReportCli: each report type renders in headless Firefox") {
  // Firefox headless has no DOM dump: this checks that each page loads and renders to a full-page
  // screenshot of a drawn page's size. The script-error and chart-drawn marks are checked in
  // Chromium above. Skipped, with a message, when Firefox is not installed.
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
    const std::string png = s / (name + ".png");
    const std::string home = s / ("home-" + name);  // a profile of its own, removed with the folder
    fs::create_directories(home);
    const std::string command = "HOME='" + home + "' timeout 180 '" + firefox +
                                "' --headless --window-size=1200,2400 --screenshot '" + png + "' 'file://" +
                                s / (name + ".html") + "' > /dev/null 2>&1";
    const int rc = std::system(command.c_str());
    CHECK_MESSAGE(rc == 0, "firefox failed: " << command);
    const std::string image = slurp(png);
    REQUIRE(image.size() > 8);
    CHECK(image.compare(0, 8, "\x89PNG\r\n\x1a\n") == 0);
    // Measured with firefox-esr 153 at 1200x2400: an empty page gives a 56 KB PNG, the smallest
    // report here (the simulation) about 330 KB; a page that drew nothing would be near the former.
    CHECK(image.size() > 150000);
  }
}
