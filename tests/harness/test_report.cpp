// The building blocks of the HTML reports (include/alphaledger/report.hpp): escaping, the JSON
// block, thinning for drawing, the atomic file write, and the pages' structure.
#include <doctest/doctest.h>
#include <sys/stat.h>
#include <unistd.h>

#include <cmath>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <nlohmann/json.hpp>
#include <sstream>

#include "alphaledger/report.hpp"
#include "harness/report_encode.hpp"

namespace al = alphaledger;
namespace fs = std::filesystem;

namespace {

// The text between <script type="application/json" id="report-data"> and the next </script>.
std::string data_block(const std::string& html) {
  const std::string open = "<script type=\"application/json\" id=\"report-data\">";
  const auto start = html.find(open);
  REQUIRE(start != std::string::npos);
  const auto end = html.find("</script>", start + open.size());
  REQUIRE(end != std::string::npos);
  return html.substr(start + open.size(), end - start - open.size());
}

std::size_t count_of(const std::string& text, const std::string& what) {
  std::size_t n = 0;
  for (auto at = text.find(what); at != std::string::npos; at = text.find(what, at + 1)) ++n;
  return n;
}

fs::path scratch_folder(const std::string& name) {
  const fs::path dir =
      fs::temp_directory_path() / ("alphaledger-report-" + name + "-" + std::to_string(::getpid()));
  fs::remove_all(dir);
  fs::create_directories(dir);
  return dir;
}

al::StreamReportData small_stream(const std::vector<std::string>& ids) {
  al::StreamReportData d;
  d.info.name = "checkout-team";
  d.info.config.kind = al::RuleKind::kLordPlusPlus;
  d.info.config.alpha = 0.05;
  d.info.config.initial_wealth = 0.025;
  d.configuration = "lord++ alpha=0.05 initial_wealth=0.025 spending=jm evaluation=exact";
  d.generated_at_ms = 1700000000000;
  for (std::size_t i = 0; i < ids.size(); ++i) {
    al::DecisionRecord r;
    r.step = i + 1;
    r.id = ids[i];
    r.p_value = i % 2 == 0 ? 0.0004 : 0.5;
    r.level = 0.001 / static_cast<double>(i + 1);
    r.rejected = r.p_value <= r.level;
    r.wealth = 0.05 - 0.001 * static_cast<double>(i);
    r.decided_at_ms = 1700000000000 + static_cast<std::int64_t>(i);
    d.records.push_back(r);
  }
  d.info.tests = ids.size();
  return d;
}

}  // namespace

TEST_CASE("Report: html_escape turns markup characters into references") {
  // The five characters of HTML's syntax (common practice, no source beyond the HTML standard's
  // list of named references).
  CHECK(al::html_escape("a<b>&\"c'") == "a&lt;b&gt;&amp;&quot;c&#39;");
  CHECK(al::html_escape("</script><script>alert(1)</script>") ==
        "&lt;/script&gt;&lt;script&gt;alert(1)&lt;/script&gt;");
  CHECK(al::html_escape("caf\xC3\xA9") == "caf\xC3\xA9");            // valid UTF-8 kept
  CHECK(al::html_escape("x\xFFy") == "x\xEF\xBF\xBDy");              // a stray byte: U+FFFD
  CHECK(al::html_escape("\xE2\x82") == "\xEF\xBF\xBD\xEF\xBF\xBD");  // cut-off sequence
  CHECK(al::html_escape("\xC0\xAF") == "\xEF\xBF\xBD\xEF\xBF\xBD");  // overlong form refused
  CHECK(al::html_escape("") == "");
}

TEST_CASE("Report: script_json cannot be closed by a value and parses back to the same value") {
  nlohmann::json value = {
      {"id", "</script><script>alert(1)</script>"}, {"other", "a & b > c \xE2\x80\xA8 line"}, {"p", 0.0004}};
  const std::string text = al::script_json(value.dump());
  CHECK(text.find('<') == std::string::npos);
  CHECK(text.find('>') == std::string::npos);
  CHECK(text.find('&') == std::string::npos);
  CHECK(text.find("\xE2\x80\xA8") == std::string::npos);
  CHECK(text.find("\\u003c/script\\u003e") != std::string::npos);
  CHECK(nlohmann::json::parse(text) == value);
}

TEST_CASE("Report: an id with </script> stays inside the data block of a page") {
  const std::string evil = "</script><script>window.hacked=1</script>";
  const std::string html = al::render_stream_report(small_stream({"exp-1", evil, "<!--", "exp-4"}));
  // The page's own script blocks only: the error trap, the data, Chart.js, the drawing script.
  CHECK(count_of(html, "</script>") == 4);
  CHECK(html.find("window.hacked") != std::string::npos);  // present, but only as escaped data
  CHECK(html.find("<script>window.hacked") == std::string::npos);
  const auto data = nlohmann::json::parse(data_block(html));
  CHECK(data["decisions"]["id"][1] == evil);
  CHECK(data["decisions"]["id"][2] == "<!--");
  // The stream name appears in the title and heading escaped.
  const std::string html2 = [&] {
    auto d = small_stream({"a"});
    d.info.name = "<b>x</b>";
    return al::render_stream_report(d);
  }();
  CHECK(html2.find("<title>Stream &lt;b&gt;x&lt;/b&gt;</title>") != std::string::npos);
}

TEST_CASE("Report: the stream page embeds every decision unrounded and marks reserved wealth as missing") {
  auto d = small_stream({"a", "b", "c"});
  d.records[1].level = 0.1 + 0.2;  // 0.30000000000000004: must come back bit for bit
  const auto data = nlohmann::json::parse(data_block(al::render_stream_report(d)));
  CHECK(data["report"] == "stream");
  CHECK(data["decisions"]["level"][1].get<double>() == 0.1 + 0.2);
  CHECK(data["decisions"]["step"].size() == 3);
  CHECK(data["decisions"]["rejected"][0] == 1);  // 0.0004 <= 0.001
  CHECK(data["reserved_wealth"].is_null());
  CHECK(data["drawn"].size() == 3);
  CHECK(data["guarantee"].get<std::string>().find("FDR <= alpha") == 0);
}

TEST_CASE("Report: drawing_indices keeps every flagged point, the first and the last") {
  SUBCASE("small inputs are drawn whole") {
    CHECK(al::drawing_indices(0, {}, 10).empty());
    CHECK(al::drawing_indices(3, {}, 10) == std::vector<std::size_t>{0, 1, 2});
  }
  SUBCASE("long inputs are thinned, flagged points kept") {
    const std::size_t n = 100000;
    std::vector<bool> keep(n);
    for (std::size_t i = 7; i < n; i += 997) keep[i] = true;  // 101 flagged points, none at the ends
    keep[50001] = keep[50002] = true;
    const auto idx = al::drawing_indices(n, keep, 1000);
    CHECK(idx.front() == 0);
    CHECK(idx.back() == n - 1);
    CHECK(std::is_sorted(idx.begin(), idx.end()));
    CHECK(std::adjacent_find(idx.begin(), idx.end()) == idx.end());  // no repeats
    for (std::size_t i = 0; i < n; ++i) {
      if (keep[i]) CHECK(std::binary_search(idx.begin(), idx.end(), i));
    }
    CHECK(idx.size() <= 1000 + 2);
    CHECK(idx.size() >= 900);
    // Evenly spread: no gap between drawn points is much wider than n / budget.
    std::size_t widest = 0;
    for (std::size_t k = 1; k < idx.size(); ++k) widest = std::max(widest, idx[k] - idx[k - 1]);
    CHECK(widest <= 2 * n / 1000);
  }
  SUBCASE("more flagged points than the budget: all of them") {
    std::vector<bool> keep(50, true);
    CHECK(al::drawing_indices(50, keep, 10).size() == 50);
  }
}

TEST_CASE("Report: write_file_atomically replaces the file in one step and leaves nothing on failure") {
  const fs::path dir = scratch_folder("write");
  const std::string path = (dir / "r.html").string();
  REQUIRE(al::write_file_atomically(path, "first", "-o"));
  REQUIRE(al::write_file_atomically(path, "second", "-o"));
  std::ifstream in(path);
  std::stringstream text;
  text << in.rdbuf();
  CHECK(text.str() == "second");
  CHECK(std::distance(fs::directory_iterator(dir), fs::directory_iterator()) == 1);  // no temporary left

  const auto missing =
      al::write_file_atomically((dir / "no-such-folder" / "r.html").string(), "x", "--report");
  REQUIRE_FALSE(missing);
  CHECK(missing.error().kind == al::ErrorKind::kInvalidArgument);
  CHECK(missing.error().message.find("--report") != std::string::npos);
  CHECK(missing.error().message.find("does not exist") != std::string::npos);

  const auto folder = al::write_file_atomically(dir.string(), "x", "-o");
  REQUIRE_FALSE(folder);
  CHECK(folder.error().message.find("is a folder") != std::string::npos);

  const auto empty = al::check_output_path("", "-o");
  CHECK_FALSE(empty);
  fs::remove_all(dir);
}

TEST_CASE("Report: replay and simulation pages carry their data") {
  al::CompactLog log;
  log.source = "log.csv";
  for (int i = 0; i < 4; ++i) {
    al::CompactRecord r;
    r.id_offset = log.ids.size();
    const std::string id = "t" + std::to_string(i);
    log.ids += id;
    r.id_size = static_cast<std::uint16_t>(id.size());
    r.p_value = i == 0 ? 1e-6 : 0.3;
    r.line = static_cast<std::uint64_t>(i + 2);
    log.records.push_back(r);
  }
  auto procs = al::resolve_procedures({"lord++", "bh"}, al::RuleSpec{}, true);
  REQUIRE(procs);
  al::ReplayResult result{*procs, {}};
  for (const auto& p : *procs) {
    auto& ds = result.decisions.emplace_back();
    al::replay_each(log, p, [&](std::size_t, const al::Decision& d) { ds.push_back(d); });
  }
  const auto summaries = al::summarize(log, *procs);
  al::ReplayReportData rd;
  rd.log = &log;
  rd.result = &result;
  rd.summaries = &summaries;
  const auto data = nlohmann::json::parse(data_block(al::render_replay_report(rd)));
  CHECK(data["rules"].size() == 2);
  CHECK(data["rules"][0]["rule"] == "lord++");
  // Four doubles in binary64 are shorter than in decimal: the level column is in the f64 form
  // (docs/reports.md "The data block"), the first 8 bytes of its base64 the first level.
  const auto& level = data["rules"][0]["level"];
  REQUIRE(level.contains("f64"));
  CHECK(level["count"] == 4);
  {
    static const std::string kDigits = "ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789+/";
    const std::string b64 = level["f64"].get<std::string>().substr(0, 12);  // 9 bytes, the first 8 used
    std::uint64_t bits = 0, acc = 0;
    int have = 0, got = 0;
    for (char c : b64) {
      acc = (acc << 6) | kDigits.find(c);
      have += 6;
      while (have >= 8 && got < 8) {
        have -= 8;
        bits |= ((acc >> have) & 0xFF) << (8 * got++);  // little-endian
      }
    }
    double first = 0;
    std::memcpy(&first, &bits, 8);
    CHECK(first == result.decisions[0][0].level);
  }
  CHECK(data["rules"][1]["rejected"][0] == 1);  // bh rejects 1e-6 of 4 tests at 0.05 / 4
  CHECK(data["hindsight"] == "bh");
  CHECK(data["input"]["line"][3] == 5);
  CHECK_FALSE(data["input"].contains("is_null"));

  al::SimulationReportData sd;
  sd.parameter = "effect";
  sd.values = {1, 2};
  al::ProcedureSummary s;
  s.rule = "lord++";
  s.fdr = 0.01;
  s.fdr_se = 0.002;
  s.power_se = std::nan("");
  sd.summaries = {{s}, {s}};
  const auto sim = nlohmann::json::parse(data_block(al::render_simulation_report(sd)));
  CHECK(sim["swept"] == "effect");
  CHECK(sim["rows"].size() == 2);
  CHECK(sim["rows"][1]["value"] == 2.0);
  CHECK(sim["rows"][0]["power_se"].is_null());  // NaN is not JSON: null
}

TEST_CASE("Report: reserved wealth after each decision follows launches, finishes and abandons in chain order") {
  // Hand-worked (docs/reports.md "Stream report"): a running test holds its level until it is
  // decided or abandoned; a test decided at the step of its own launch never holds one.
  using alphaledger::DecisionRecord;
  const auto rec = [](std::uint64_t step, std::uint64_t launch, double level, bool abandoned) {
    DecisionRecord r;
    r.step = step;
    r.launch = launch;
    r.level = level;
    r.abandoned = abandoned;
    return r;
  };
  // Steps: 1 launch 1 (0.01), 2 launch 2 (0.02), 3 abandon 1, 4 launch 3 (0.03), 5 finish 3,
  // 6 finish 2, 7 launch 4 (0.04, still running), 8 launch-and-decide 5 (0.05).
  const std::vector<DecisionRecord> history = {rec(3, 1, 0.01, true), rec(5, 3, 0.03, false),
                                               rec(6, 2, 0.02, false), rec(8, 5, 0.05, false)};
  const std::vector<alphaledger::RunningEntry> running = {{"t4", 4, 0.04, 0}};
  const auto reserved = alphaledger::reserved_after_each(history, running);
  REQUIRE(reserved.size() == 3);  // decisions only
  CHECK(reserved[0] == 0.02);     // after finish 3: test 2 runs
  CHECK(reserved[1] == 0.0);      // after finish 2: nothing runs
  CHECK(reserved[2] == 0.04);     // after test 5 (launched and decided at once): test 4 runs
}

TEST_CASE("Report: the data block's compact forms are chosen only where they give back the same numbers") {
  // docs/reports.md "The data block"; no outside source (an encoding of our own).
  namespace rd = alphaledger::report_detail;
  SUBCASE("a column of one value is written once; a non-finite value keeps the plain array") {
    const std::vector<double> same(500, 0.05 / 3);
    const auto j = rd::number_column(same);
    CHECK(j["same"].get<double>() == 0.05 / 3);
    CHECK(j["count"] == 500);
    std::vector<double> with_nan(500, 0.25);
    with_nan[7] = std::nan("");
    const auto plain = rd::number_column(with_nan);
    REQUIRE(plain.is_array());
    CHECK(plain[7].is_null());
    CHECK(plain[8].get<double>() == 0.25);
  }
  SUBCASE("wealth as 'before minus the level' only where that arithmetic gives the identical double") {
    std::vector<double> level, wealth;
    double w = 0.025;
    for (int i = 0; i < 200; ++i) {
      level.push_back(0.001 / (i + 1) + 1e-7 * i);
      w = w - level.back() / 0.5;
      wealth.push_back(w);
    }
    const auto exact = rd::number_column(wealth, level, 0.025, 0.5);
    CHECK(exact["codes"] == "l200");
    CHECK(exact["f64"] == "");
    // One value one ulp away from the arithmetic: that row, and only that row, is written out;
    // the rows after it follow from it.
    wealth[50] = std::nextafter(wealth[50], 1.0);
    for (std::size_t i = 51; i < wealth.size(); ++i) wealth[i] = wealth[i - 1] - level[i] / 0.5;
    const auto one_off = rd::number_column(wealth, level, 0.025, 0.5);
    CHECK(one_off["codes"] == "l50xl149");
    CHECK(one_off["f64"].get<std::string>().size() == 12);  // one double: 8 bytes in base64
  }
  SUBCASE("integers as differences, a large one kept apart") {
    std::vector<std::int64_t> steps, times;
    for (std::int64_t i = 0; i < 300; ++i) {
      steps.push_back(i + 1);
      times.push_back(1764000000000 + 3 * i + (i >= 100 ? 86400000 : 0));
    }
    const auto s = rd::integer_column(steps);
    CHECK(s["first"] == 1);
    CHECK(s["every"] == 1);
    const auto t = rd::integer_column(times);
    REQUIRE(t.contains("small_diffs"));
    CHECK(t["large"] == nlohmann::ordered_json::array({86400003}));
    CHECK(t["small_diffs"].get<std::string>()[99] == '/');  // the difference into row 100
  }
  SUBCASE("ids front-coded, a column of few values as indices") {
    std::vector<std::string> ids, teams;
    for (int i = 1; i <= 300; ++i) {
      ids.push_back("exp-" + std::to_string(100000 + i));
      teams.push_back(i % 3 == 0 ? "search" : "checkout");
    }
    const auto f = rd::text_column(ids);
    REQUIRE(f.contains("front"));
    CHECK(f["front"].get<std::string>().substr(0, 12) == "0:exp-100001");  // 0 shared, 10 new (':' = '0' + 10)
    CHECK(f["front"].get<std::string>().substr(12, 3) == "912");             // 9 shared, 1 new: "2"
    const auto t = rd::text_column(teams);
    CHECK(t["values"] == nlohmann::ordered_json::array({"checkout", "search"}));
    CHECK(t["index"].get<std::string>().substr(0, 3) == "AAB");
  }
}
