"""Tests of the launch-time, e-value, explain, always-valid and report features of the Python module,
each against the command line built beside it (same inputs, same bytes or the same JSON values).
Run by ctest (test `python`) with PYTHONPATH at the built package and ALPHALEDGER_BINARY /
ALPHALEDGER_SOURCE_DIR set."""

import base64
import csv
import io
import json
import os
import re
import struct
import tempfile
import threading
import time
import unittest

import alphaledger as al

BINARY = os.environ.get("ALPHALEDGER_BINARY", "alphaledger")
SOURCE = os.environ.get("ALPHALEDGER_SOURCE_DIR", os.path.join(os.path.dirname(__file__), "..", ".."))
DEMO = os.path.join(SOURCE, "replay_data", "larkspur_experiments.csv")

try:
    import pandas as pd
except ImportError:
    pd = None

import subprocess


def cli(*args, ok=True):
    p = subprocess.run([BINARY, *args], capture_output=True, text=True, timeout=300)
    if ok and p.returncode != 0:
        raise AssertionError(f"alphaledger {' '.join(args)} exited {p.returncode}: {p.stderr}")
    return p


def cli_error(p):
    line = p.stderr.strip().splitlines()[-1]
    prefix = "alphaledger: error: "
    return line[len(prefix):] if line.startswith(prefix) else line


def cli_json_lines(*args):
    return [json.loads(line) for line in cli("--json", *args).stdout.splitlines() if line.strip()]


# docs/methods.md section 14: the stream and the LORD++ levels (14.3), alpha 0.05.
P = [0.0004, 0.0012, 0.36, 0.0009, 0.78, 0.0032, 0.17, 0.0011, 0.44, 0.0100]
LORD_LEVELS = [0.001370386057, 0.0016684017, 0.003292613799, 0.001060948593, 0.00363847711, 0.001351990812,
               0.00115660396, 0.000989535854, 0.0008614799781, 0.0007620915508]

SAFFRON_LEVELS = [0.005468627072, 0.01093725414, 0.02187450829, 0.02187450829, 0.03281176243, 0.01082384502,
                  0.02176109917, 0.02176109917, 0.03269835331, 0.03269835331]

LAUNCH_LOG = "id,launched_at,finished_at,p_value\nA,1,5,0.00001\nB,2,3,0.0002\nC,4,6,0.3\n"
E_LOG = "id,p_value,e_value\na,0.001,1000\nb,0.5,0.2\nc,0.02,30\n"


class TempFiles(unittest.TestCase):
    def setUp(self):
        self._dir = tempfile.TemporaryDirectory()
        self.dir = self._dir.name

    def tearDown(self):
        self._dir.cleanup()

    def write(self, name, text):
        path = os.path.join(self.dir, name)
        with open(path, "w", newline="") as f:
            f.write(text)
        return path


class ReplayLaunchAndEValues(TempFiles):
    def test_launch_column_like_cli(self):
        path = self.write("launch.csv", LAUNCH_LOG)
        rules = ["lord++", "saffron", "bh"]
        expected = cli("replay", path, "--rules", ",".join(rules)).stdout
        self.assertTrue(expected.startswith("rule,step,launch,id,p_value,level,rejected,wealth\n"))
        self.assertEqual(al.replay_csv(path, rules=rules), expected)
        # The same rows given in memory: the same numbers, launch None for bh (the CLI's empty cell).
        rows = list(csv.DictReader(io.StringIO(LAUNCH_LOG)))
        got = al.replay(rows, rules=rules, as_frame=False)
        lines = list(csv.DictReader(io.StringIO(expected)))
        self.assertEqual(len(got), len(lines))
        self.assertEqual(list(got[0]), ["rule", "step", "launch", "id", "p_value", "level", "rejected", "wealth"])
        for g, e in zip(got, lines):
            self.assertEqual(g["launch"], int(e["launch"]) if e["launch"] else None)
            self.assertEqual((g["rule"], g["step"], g["id"]), (e["rule"], int(e["step"]), e["id"]))
            self.assertEqual(g["level"], float(e["level"]))
            self.assertEqual(g["rejected"], int(e["rejected"]))

    def test_e_value_column_and_e_bh_like_cli(self):
        path = self.write("e.csv", E_LOG)
        rules = ["lord++", "e-lond", "e-bh"]
        expected = cli("replay", path, "--rules", ",".join(rules)).stdout
        self.assertTrue(expected.startswith("rule,step,id,p_value,e_value,level,rejected,wealth\n"))
        self.assertEqual(al.replay_csv(path, rules=rules), expected)
        rows = list(csv.DictReader(io.StringIO(E_LOG)))
        got = al.replay(rows, rules=["e-bh"], as_frame=False)
        self.assertEqual(list(got[0]), ["rule", "step", "id", "p_value", "e_value", "level", "rejected", "wealth"])
        # e-BH (Wang & Ramdas, JRSS-B 2022, eq. for k*): with n = 3 and alpha = 0.05, the k largest
        # e-values are rejected for the largest k with e_(k) >= n / (k alpha): k = 2 (30 >= 30),
        # k = 3 fails (0.2 < 20). The level is 1 / threshold = 1 / 30.
        self.assertEqual([r["rejected"] for r in got], [1, 0, 1])
        self.assertAlmostEqual(got[0]["level"], 1 / 30, delta=1e-15)
        self.assertIsNone(got[0]["wealth"])

    def test_e_values_only_leave_p_value_empty(self):
        text = "id,e_value\na,1000\nb,0.5\n"
        path = self.write("only_e.csv", text)
        expected = cli("replay", path, "--rules", "e-lond").stdout
        self.assertEqual(al.replay_csv(path, rules="e-lond"), expected)
        got = al.replay(list(csv.DictReader(io.StringIO(text))), rules="e-lond", as_frame=False)
        self.assertIsNone(got[0]["p_value"])
        self.assertEqual(got[0]["e_value"], 1000.0)

    def test_missing_e_value_column_same_message_as_cli(self):
        path = self.write("only_p.csv", "id,p_value\na,0.001\n")
        p = cli("replay", path, "--rules", "e-lond", ok=False)
        self.assertEqual(p.returncode, 2)
        with self.assertRaises(al.InvalidInput) as ctx:
            al.replay(path, rules="e-lond")
        self.assertEqual(str(ctx.exception), cli_error(p))
        self.assertIn("e_value", str(ctx.exception))

    def test_alternative_for_summary_columns(self):
        path = os.path.join(SOURCE, "replay_data", "larkspur_summaries.csv")
        expected = cli("replay", path, "--alternative", "greater").stdout
        self.assertEqual(al.replay_csv(path, alternative="greater"), expected)
        self.assertNotEqual(al.replay_csv(path), expected)

    @unittest.skipIf(pd is None, "pandas is not installed")
    def test_dataframe_columns(self):
        frame = al.replay(pd.read_csv(io.StringIO(LAUNCH_LOG), float_precision="round_trip"), rules=["lord++", "bh"])
        self.assertEqual(list(frame.columns), ["rule", "step", "launch", "id", "p_value", "level", "rejected", "wealth"])


class SimulateOverlapAndPeeking(unittest.TestCase):
    COMMON = ["--tests", "300", "--runs", "12", "--seed", "5", "--threads", "2"]
    ARGS = dict(tests=300, runs=12, seed=5, threads=2)

    def test_mean_duration_like_cli(self):
        expected = cli("simulate", "--rules", "lord++,saffron,bh", "--mean-duration", "4", *self.COMMON).stdout
        got = al.simulate_csv(["lord++", "saffron", "bh"], mean_duration=4, **self.ARGS)
        self.assertEqual(got, expected)
        self.assertNotEqual(got, al.simulate_csv(["lord++", "saffron", "bh"], **self.ARGS))

    def test_peeking_like_cli(self):
        expected = cli("simulate", "--rules", "lord++,e-lond", "--peeking", "5", "--mixture-sd", "2",
                       *self.COMMON).stdout
        self.assertEqual(al.simulate_csv(["lord++", "e-lond"], peeking=5, mixture_sd=2, **self.ARGS), expected)
        rows = al.simulate(["lord++", "e-lond"], peeking=5, as_frame=False, **self.ARGS)
        self.assertEqual([r["rule"] for r in rows],
                         ["lord++", "lord++:peek-fixed", "lord++:peek-anytime", "e-lond", "e-lond:peek-mixture"])

    def test_evaluation_defaults_to_fast_as_in_cli(self):
        # The CLI runs lord++/saffron/addis with the fast evaluation unless told otherwise
        # (docs/simulate.md); Python follows it, and exact stays reachable.
        for evaluation in ("exact", "fast"):
            with self.subTest(evaluation=evaluation):
                expected = cli("simulate", "--rules", "addis", "--evaluation", evaluation, *self.COMMON).stdout
                self.assertEqual(al.simulate_csv("addis", evaluation=evaluation, **self.ARGS), expected)
        self.assertEqual(al.simulate_csv("addis", **self.ARGS),
                         cli("simulate", "--rules", "addis", *self.COMMON).stdout)
        # The evaluation that ran, as `simulate --json` reports it (decisions rarely differ between
        # the two, so the CSV alone cannot tell).
        want = cli_json_lines("simulate", "--rules", "lord++,bh", *self.COMMON)
        got = al.simulate(["lord++", "bh"], as_frame=False, **self.ARGS)
        self.assertEqual([r["evaluation"] for r in got], [w["evaluation"] for w in want])
        self.assertEqual(got[0]["evaluation"], "fast")
        self.assertEqual(al.simulate("lord++", evaluation="exact", as_frame=False, **self.ARGS)[0]["evaluation"],
                         "exact")
        params = {"evaluation": None}
        al.simulate_csv("addis", tests=10, runs=1, **params)
        self.assertEqual(params, {"evaluation": None})

    def test_bad_overlap_and_peeking(self):
        with self.assertRaises(al.InvalidInput) as ctx:
            al.simulate("lord++", tests=10, runs=2, mean_duration=-1)
        # The CLI's message with the keyword's name where the CLI names its flag (--mean-duration).
        cli_message = cli_error(cli("simulate", "--tests", "10", "--runs", "2", "--mean-duration", "-1", ok=False))
        self.assertEqual(str(ctx.exception), cli_message.replace("--mean-duration", "mean_duration"))
        with self.assertRaises(al.InvalidInput) as ctx:
            al.simulate("lord++", tests=10, runs=2, mixture_sd=1)
        self.assertIn("peeking", str(ctx.exception))
        with self.assertRaises(al.InvalidInput):
            al.simulate("lord++", tests=10, runs=2, peeking=-1)


class RuleExplainAndEValues(TempFiles):
    def test_explain_lord_after_two_rejections(self):
        rule = al.Rule("lord++")
        rule.record(P[0])
        rule.record(P[1])
        e = al.explain(rule)
        # docs/methods.md 14.3, t = 3: the level, as the terms add up to it.
        self.assertAlmostEqual(e["level"] / LORD_LEVELS[2], 1.0, delta=1e-9)
        self.assertEqual(e["level"], rule.next_level())
        self.assertEqual(e["test"], 3)
        self.assertEqual([t["kind"] for t in e["terms"]], ["initial_wealth", "first_rejection_deposit", "rejection_deposit"])
        self.assertEqual([t["test"] for t in e["terms"]], [None, 1, 2])
        self.assertAlmostEqual(sum(t["amount"] for t in e["terms"]), e["uncapped"], delta=1e-15)
        self.assertIsNone(e["cap"])
        self.assertEqual(rule.explain(), e)

    def test_explain_like_cli_log(self):
        # The same walk as `explain --log FILE --rule R --json`, value for value.
        for name in ("lord++", "saffron", "addis", "lond", "alpha-investing"):
            with self.subTest(rule=name):
                path = self.write("log.csv", "id,p_value\n" + "".join(f"t{i},{p!r}\n" for i, p in enumerate(P)))
                want = cli_json_lines("explain", "--log", path, "--rule", name)[0]
                rule = al.Rule(name)
                for p in P:
                    rule.record(p)
                self.assertEqual(al.explain(rule), want)

    def test_launched_tests_are_explained_with_their_deposits(self):
        rule = al.Rule("lord++")
        first = rule.launch()
        second = rule.launch()
        rule.finish(second, 0.0001)  # the second launch rejects first
        self.assertAlmostEqual(rule.reserved, first.level, delta=0)
        e = rule.explain()
        self.assertEqual([t["test"] for t in e["terms"] if t["kind"] != "initial_wealth"], [2])
        self.assertAlmostEqual(sum(t["amount"] for t in e["terms"]), e["uncapped"], delta=1e-15)

    def test_e_lond_record_e_like_cli(self):
        path = self.write("e.csv", E_LOG)
        expected = list(csv.DictReader(io.StringIO(cli("replay", path, "--rules", "e-lond").stdout)))
        rule = al.Rule("e-lond")
        for row, e in zip(expected, (1000, 0.2, 30)):
            out = rule.record_e(e)
            self.assertEqual(out.level, float(row["level"]))
            self.assertEqual(int(out.rejected), int(row["rejected"]))
        want = cli_json_lines("explain", "--log", path, "--rule", "e-lond")[0]
        self.assertEqual(al.explain(rule), want)
        with self.assertRaises(al.InvalidInput):
            rule.record(0.01)
        with self.assertRaises(al.InvalidInput):
            al.explain("lord++")


class LedgerLaunchTime(TempFiles):
    def test_launch_abandon_running_status_history_like_cli(self):
        path = os.path.join(self.dir, "ledger")
        with al.Ledger(path) as ledger:
            ledger.create_stream("s", rule="lord++")
            a = ledger.launch("s", id="a")
            b = ledger.launch("s", id="b")
            self.assertEqual((a["launch"], b["launch"]), (1, 2))
            # docs/methods.md 14.3 t = 1: the first level, reserved at launch.
            self.assertAlmostEqual(a["level"] / LORD_LEVELS[0], 1.0, delta=1e-9)
            self.assertTrue(ledger.launch("s", id="a")["repeat"])
            status = ledger.status("s")
            self.assertEqual(status["running"], 2)
            self.assertEqual(status["reserved"], a["level"] + b["level"])
            running = ledger.running("s", as_frame=False)
            self.assertEqual([r["id"] for r in running], ["a", "b"])
            self.assertEqual(list(running[0]), ["id", "launch", "level", "launched_at"])
            d = ledger.decide("s", id="b", p_value=0.0001)
            self.assertEqual(d["level"], b["level"])  # decided against the level reserved at launch
            self.assertEqual((d["launch"], d["launched_at"]), (2, b["launched_at"]))
            gone = ledger.abandon("s", id="a")
            self.assertEqual(gone["level"], a["level"])
            self.assertTrue(ledger.abandon("s", id="a")["repeat"])
            ledger.decide("s", id="c", p_value=0.5)
            rows = ledger.history("s", as_frame=False)
            running_now = ledger.running("s", as_frame=False)
            status_now = ledger.status("s")
            explained = ledger.explain("s")
            try:
                explained_b = ledger.explain("s", id="b")
            except al.Refused as e:
                explained_b = e
        # The command line reads the same things from the same ledger.
        want_running = cli_json_lines("--ledger", path, "running", "s")
        self.assertEqual(running_now, want_running)  # none left
        want_status = cli_json_lines("--ledger", path, "status", "s")[0]
        for key in ("tests", "rejections", "wealth", "next_level", "running", "reserved"):
            self.assertEqual(status_now[key], want_status[key], msg=key)
        want_rows = [json.loads(line) for line in
                     cli("--ledger", path, "history", "s", "--format", "jsonl").stdout.splitlines()]
        self.assertEqual(len(rows), len(want_rows))
        for got, want in zip(rows, want_rows):
            want.pop("rule")
            self.assertEqual(got, want)
        self.assertEqual([r["abandoned"] for r in rows], [False, True, False])
        self.assertEqual(explained, cli_json_lines("--ledger", path, "explain", "s")[0])
        # A test decided after a launch: whatever the CLI answers, Python answers the same.
        p = cli("--json", "--ledger", path, "explain", "s", "--id", "b", ok=False)
        if p.returncode == 0:
            self.assertEqual(explained_b, json.loads(p.stdout))
        else:
            self.assertEqual(p.returncode, 3)
            self.assertIsInstance(explained_b, al.Refused)
            self.assertEqual(json.loads(p.stderr)["error"]["message"], str(explained_b))
        self.assertAlmostEqual(sum(t["amount"] for t in explained["terms"]), explained["uncapped"], delta=1e-15)

    def test_explain_by_id_like_cli(self):
        path = os.path.join(self.dir, "ledger")
        with al.Ledger(path) as ledger:
            ledger.create_stream("s", rule="saffron")
            for t, p in enumerate(P):
                ledger.decide("s", id=f"exp-{t}", p_value=p)
            got = {i: ledger.explain("s", id=f"exp-{i}") for i in (0, 3, 9)}
            nxt = ledger.explain("s")
        for i, e in got.items():
            want = cli_json_lines("--ledger", path, "explain", "s", "--id", f"exp-{i}")[0]
            self.assertEqual(e, want)
            self.assertEqual(e["id"], f"exp-{i}")
            # docs/methods.md 14.4: the level test i + 1 got.
            self.assertAlmostEqual(e["level"] / SAFFRON_LEVELS[i], 1.0, delta=1e-9)
            self.assertAlmostEqual(sum(t["amount"] for t in e["terms"]), e["uncapped"], delta=1e-15)
        self.assertEqual(nxt, cli_json_lines("--ledger", path, "explain", "s")[0])

    def test_running_as_cli(self):
        path = os.path.join(self.dir, "ledger")
        with al.Ledger(path) as ledger:
            ledger.create_stream("s", rule="saffron")
            ledger.launch("s", id="x")
            ledger.launch("s", id="y")
            got = ledger.running("s", as_frame=False)
        want = cli_json_lines("--ledger", path, "running", "s")
        for w in want:
            self.assertEqual(w.pop("stream"), "s")
        self.assertEqual(got, want)
        if pd is not None:
            with al.Ledger(path) as ledger:
                self.assertEqual(list(ledger.running("s").columns), ["id", "launch", "level", "launched_at"])

    def test_errors_map_to_classes_with_the_cli_message(self):
        path = os.path.join(self.dir, "ledger")
        with al.Ledger(path) as ledger:
            ledger.create_stream("s", rule="lord++")
            ledger.decide("s", id="done", p_value=0.2)
            with self.assertRaises(al.Refused) as ctx:
                ledger.launch("nope", id="a")
            self.assertEqual(ctx.exception.code, "unknown_stream")
            with self.assertRaises(al.Refused) as ctx:
                ledger.launch("s", id="done")
            launch_message = str(ctx.exception)
            with self.assertRaises(al.Refused) as ctx:
                ledger.abandon("s", id="never")
            self.assertEqual(ctx.exception.code, "unknown_test")
            abandon_message = str(ctx.exception)
            with self.assertRaises(al.InvalidInput):
                ledger.launch("s", id="")
            with self.assertRaises(al.Refused) as ctx:
                ledger.explain("s", id="missing")
            self.assertEqual(ctx.exception.code, "unknown_test")
        p = cli("--ledger", path, "launch", "s", "--id", "done", ok=False)
        self.assertEqual(p.returncode, 3)
        self.assertTrue(cli_error(p).startswith(launch_message), (cli_error(p), launch_message))
        p = cli("--ledger", path, "abandon", "s", "--id", "never", ok=False)
        self.assertEqual(p.returncode, 3)
        self.assertTrue(cli_error(p).startswith(abandon_message), (cli_error(p), abandon_message))


class ExplainOverlappingLaunches(TempFiles):
    def test_running_and_overlapping_tests_like_cli(self):
        # Tests launched while others run: the explanation of each, running or decided, and of the
        # next test is the CLI's object (same walk through launches, finishes and abandons).
        path = os.path.join(self.dir, "ledger")
        with al.Ledger(path) as ledger:
            ledger.create_stream("s", rule="lord++")
            ledger.decide("s", id="a", p_value=0.0004)
            ledger.launch("s", id="b")
            ledger.launch("s", id="c")
            ledger.decide("s", id="c", p_value=0.0001)  # rejected while b still runs
            ledger.launch("s", id="d")
            got = {name: ledger.explain("s", id=name) for name in ("a", "b", "c", "d")}
            got_next = ledger.explain("s")
            with self.assertRaises(al.Refused) as ctx:
                ledger.explain("s", id="zz")
            self.assertEqual(ctx.exception.code, "unknown_test")
            # The level explained for a running test is the one reserved at its launch.
            self.assertEqual(got["b"]["level"], ledger.running("s", as_frame=False)[0]["level"])
        for name, e in got.items():
            self.assertEqual(e, cli_json_lines("--ledger", path, "explain", "s", "--id", name)[0], msg=name)
        self.assertEqual(got_next, cli_json_lines("--ledger", path, "explain", "s")[0])


def _normalized_report(path):
    """The page with its own "report made" time taken out (the only part that differs between runs)."""
    with open(path, encoding="utf-8") as f:
        html = f.read()
    made = re.search(r'"generated_at":"([^"]*)"', html)
    assert made, "no generated_at in the page"
    return html.replace(made.group(1), "GENERATED")


def _reserved_wealth(page):
    """The page's reserved_wealth column: a plain array, or the compact form {"count", "f64"} with
    every row written out (little-endian binary64 in base64, docs/reports.md "The data block")."""
    m = re.search(r'"reserved_wealth":(\[[^\]]*\]|\{[^}]*\})', page)
    if m is None:
        return None
    column = json.loads(m.group(1))
    if isinstance(column, list):
        return [float(v) for v in column]
    if set(column) != {"count", "f64"}:
        raise AssertionError(f"a form of the column this test does not read: {m.group(1)[:80]}")
    raw = base64.b64decode(column["f64"])
    return list(struct.unpack(f"<{column['count']}d", raw))


class Reports(TempFiles):
    def test_stream_report_is_the_cli_page(self):
        path = os.path.join(self.dir, "ledger")
        with al.Ledger(path) as ledger:
            ledger.create_stream("s", rule="lord++")
            for t, p in enumerate(P):
                ledger.decide("s", id=f"exp-{t}", p_value=p)
            ours = os.path.join(self.dir, "ours.html")
            out = ledger.report("s", ours)
            self.assertEqual(out, {"report": "stream", "stream": "s", "tests": len(P), "path": ours})
            with self.assertRaises(al.InvalidInput) as ctx:
                ledger.report("s", os.path.join(self.dir, "no-such-folder", "r.html"))
            self.assertIn("path", str(ctx.exception))
            with self.assertRaises(al.Refused):
                ledger.report("nope", os.path.join(self.dir, "x.html"))
            self.assertFalse(os.path.exists(os.path.join(self.dir, "x.html")))
        theirs = os.path.join(self.dir, "theirs.html")
        cli("--ledger", path, "report", "s", "-o", theirs)
        self.assertEqual(_normalized_report(ours), _normalized_report(theirs))

    def test_stream_report_with_launches_is_the_cli_page(self):
        # Running tests, an abandoned one and a test decided against its reserved level: the page
        # carries the wealth reserved after each decision and the running tests, and leaves the
        # abandoned test out of the decisions, as `alphaledger report` writes it (one writer).
        path = os.path.join(self.dir, "ledger")
        with al.Ledger(path) as ledger:
            ledger.create_stream("s", rule="lord++")
            ledger.decide("s", id="a1", p_value=0.0004)
            for name in ("b1", "b2", "b3"):
                ledger.launch("s", id=name)
            ledger.decide("s", id="a2", p_value=0.03)
            ledger.decide("s", id="b2", p_value=0.0001)
            ledger.abandon("s", id="b1")
            ledger.launch("s", id="b4")
            ledger.decide("s", id="a3", p_value=0.5)
            ours = os.path.join(self.dir, "ours.html")
            out = ledger.report("s", ours)
            self.assertEqual(out["tests"], 4)  # a1, a2, b2, a3: the abandoned b1 is not a decision
        theirs = os.path.join(self.dir, "theirs.html")
        p = cli("--ledger", path, "report", "s", "-o", theirs)
        self.assertIn("4 tests", p.stdout)
        page = _normalized_report(ours)
        self.assertEqual(page, _normalized_report(theirs))
        self.assertIn('"id":["a1","a2","b2","a3"]', page)
        self.assertRegex(page, r'"running":\{"id":\["b3","b4"\],"launch":\[4,6\]')
        values = _reserved_wealth(page)
        self.assertIsNotNone(values, "no reserved wealth on the page")
        self.assertEqual(len(values), 4)
        self.assertEqual(values[0], 0.0)  # nothing was running when a1 was decided
        # After a3 (the last decision) the page's value is what status reports as reserved now.
        with al.Ledger(path) as ledger:
            self.assertEqual(values[-1], ledger.status("s")["reserved"])

    def test_replay_report_is_the_cli_page(self):
        ours = os.path.join(self.dir, "ours.html")
        theirs = os.path.join(self.dir, "theirs.html")
        csv_text = al.replay_csv(DEMO, rules=["lord++", "saffron"], alpha=0.1, report=ours)
        p = cli("replay", DEMO, "--rules", "lord++,saffron", "--alpha", "0.1", "--report", theirs)
        self.assertEqual(csv_text, p.stdout)
        self.assertEqual(_normalized_report(ours), _normalized_report(theirs))

    def test_replay_report_from_rows_keeps_other_columns(self):
        with open(DEMO, newline="") as f:
            rows = list(csv.DictReader(f))
        ours = os.path.join(self.dir, "rows.html")
        al.replay(rows, rules="lord++", report=ours, as_frame=False)
        with open(ours, encoding="utf-8") as f:
            html = f.read()
        self.assertIn('"team"', html)  # the log's own columns reach the page
        self.assertIn(rows[0]["team"], html)
        with self.assertRaises(al.InvalidInput):
            al.replay(rows, report=os.path.join(self.dir, "missing", "r.html"))

    def test_report_writing_releases_the_gil(self):
        path = os.path.join(self.dir, "ledger")
        with al.Ledger(path) as ledger:
            ledger.create_stream("s", rule="lord++")
            for t in range(200):
                ledger.decide("s", id=f"t{t}", p_value=0.5)
            ticks = [0]
            stop = threading.Event()

            def count():
                while not stop.is_set():
                    ticks[0] += 1
                    time.sleep(0.001)

            worker = threading.Thread(target=count)
            worker.start()
            started = time.monotonic()
            during = 0
            for k in range(500):  # until a quarter second has passed (bounded in count)
                before = ticks[0]
                ledger.report("s", os.path.join(self.dir, "r.html"))
                # Holding the GIL, the counter could tick only around the call, once or twice.
                during += max(0, ticks[0] - before - 2)
                if time.monotonic() - started > 0.25:
                    break
            elapsed = time.monotonic() - started
            stop.set()
            worker.join()
        self.assertGreater(elapsed, 0.25)
        self.assertGreaterEqual(during, 5, f"{ticks[0]} ticks in {elapsed:.3f} s, {during} inside the calls")


class AnytimeLikeCli(unittest.TestCase):
    def test_proportions(self):
        got = al.pvalue_proportions(control=(20000, 1000), treatment=(20000, 1180), anytime=True, mixture_sd=0.005)
        want = cli_json_lines("pvalue", "proportions", "--control", "20000:1000", "--treatment", "20000:1180",
                              "--anytime", "--mixture-sd", "0.005")[0]
        for key in ("p_value", "mixture_sd", "anytime_p_value", "e_value", "cs_low", "cs_high"):
            self.assertEqual(got[key], want[key], msg=key)

    def test_means(self):
        got = al.pvalue_means(control=(100, 10.0, 2.0), treatment=(120, 10.6, 2.5), anytime=True, mixture_sd=0.5,
                              alternative="greater")
        want = cli_json_lines("pvalue", "means", "--control", "100:10:2", "--treatment", "120:10.6:2.5",
                              "--alternative", "greater", "--anytime", "--mixture-sd", "0.5")[0]
        for key in ("p_value", "anytime_p_value", "e_value", "cs_low", "cs_high"):
            self.assertEqual(got[key], want[key], msg=key)
        # Always valid costs evidence: never smaller than the fixed-horizon p-value (from memory:
        # the mixture p-value bounds the fixed one, Howard et al. 2021 section 3).
        self.assertGreaterEqual(got["anytime_p_value"], got["p_value"])


if __name__ == "__main__":
    unittest.main()
