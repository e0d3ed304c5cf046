"""Tests of the Python module against the command line built beside it and the check tables of
docs/methods.md. Run by ctest (test `python`) with PYTHONPATH at the built package and
ALPHALEDGER_BINARY / ALPHALEDGER_SOURCE_DIR set."""

import io
import json
import os
import subprocess
import tempfile
import threading
import time
import unittest

import alphaledger as al

BINARY = os.environ.get("ALPHALEDGER_BINARY", "alphaledger")
SOURCE = os.environ.get("ALPHALEDGER_SOURCE_DIR", os.path.join(os.path.dirname(__file__), "..", ".."))
DEMO = os.path.join(SOURCE, "replay_data", "larkspur_experiments.csv")
SIMULATED = os.path.join(SOURCE, "replay_data", "simulated_stream.csv")

try:
    import pandas as pd
except ImportError:  # the list-of-dicts forms are still tested
    pd = None


def cli(*args, ok=True):
    p = subprocess.run([BINARY, *args], capture_output=True, text=True, timeout=300)
    if ok and p.returncode != 0:
        raise AssertionError(f"alphaledger {' '.join(args)} exited {p.returncode}: {p.stderr}")
    return p


def cli_error(p):
    """The message of the CLI's error line, without its prefix."""
    line = p.stderr.strip().splitlines()[-1]
    prefix = "alphaledger: error: "
    return line[len(prefix):] if line.startswith(prefix) else line


# docs/methods.md section 14: the stream and the LORD++ (14.3) and SAFFRON (14.4) tables, alpha 0.05.
P = [0.0004, 0.0012, 0.36, 0.0009, 0.78, 0.0032, 0.17, 0.0011, 0.44, 0.0100]
LORD_LEVELS = [0.001370386057, 0.0016684017, 0.003292613799, 0.001060948593, 0.00363847711, 0.001351990812,
               0.00115660396, 0.000989535854, 0.0008614799781, 0.0007620915508]
LORD_REJECTED = [True, True, False, True, False, False, False, False, False, False]
SAFFRON_LEVELS = [0.005468627072, 0.01093725414, 0.02187450829, 0.02187450829, 0.03281176243, 0.01082384502,
                  0.02176109917, 0.02176109917, 0.03269835331, 0.03269835331]
SAFFRON_REJECTED = [True, True, False, True, False, True, False, True, False, True]


class CheckTables(unittest.TestCase):
    def check(self, rule, levels, rejected):
        for t, p in enumerate(P):
            expected = levels[t]
            # The tables print 10 significant digits, so agreement is to that precision.
            self.assertAlmostEqual(rule.next_level() / expected, 1.0, delta=1e-9, msg=f"t={t + 1}")
            out = rule.record(p)
            self.assertEqual(out.step, t + 1)
            self.assertAlmostEqual(out.level / expected, 1.0, delta=1e-9, msg=f"t={t + 1}")
            self.assertEqual(out.rejected, rejected[t], msg=f"t={t + 1}")

    def test_lord_plus_plus_table_14_3(self):
        # docs/methods.md 14.3, levels and decisions.
        self.check(al.Rule("lord++", alpha=0.05), LORD_LEVELS, LORD_REJECTED)

    def test_saffron_table_14_4(self):
        # docs/methods.md 14.4, levels and decisions.
        self.check(al.Rule("saffron", alpha=0.05), SAFFRON_LEVELS, SAFFRON_REJECTED)

    def test_lord_first_levels_by_hand(self):
        # docs/methods.md 14.3 "By hand": alpha_1 = W0 gamma_1, alpha_2 = W0 gamma_2 + (alpha - W0) gamma_1.
        # The JM sequence (docs/methods.md 14.2, C = 0.079081966722): gamma_j = C log(max(j, 2)) / (j exp(sqrt(log j))).
        import math
        c = 0.079081966722
        gamma = [c * math.log(max(j, 2)) / (j * math.exp(math.sqrt(math.log(j)))) for j in (1, 2)]
        rule = al.Rule("lord++")
        a1 = rule.record(0.0004).level  # rejected: alpha - W0 is earned
        a2 = rule.next_level()
        self.assertAlmostEqual(a1 / (0.025 * gamma[0]), 1.0, delta=1e-9)
        self.assertAlmostEqual(a2 / (0.025 * gamma[1] + 0.025 * gamma[0]), 1.0, delta=1e-9)

    def test_launch_finish_abandon(self):
        # record(p) is launch() then finish(); from the rules header, no outside source.
        a, b = al.Rule("lord++"), al.Rule("lord++")
        ra = b.launch()
        self.assertEqual(ra.launch, 1)
        self.assertEqual([r.launch for r in b.running()], [1])
        self.assertEqual(ra.level, a.next_level())
        out_b = b.finish(ra, 0.0004)
        out_a = a.record(0.0004)
        self.assertEqual((out_a.level, out_a.rejected, out_a.wealth), (out_b.level, out_b.rejected, out_b.wealth))
        rc = b.launch()
        b.abandon(rc.launch)
        self.assertEqual(b.running(), [])
        with self.assertRaises(al.Refused):  # already abandoned: a conflict
            b.abandon(rc.launch)
        with self.assertRaises(al.InvalidInput):  # never launched
            b.finish(99, 0.5)


class ReplayLikeCli(unittest.TestCase):
    RULES = ["lord++", "saffron", "bh"]

    def cli_csv(self, path):
        return cli("replay", path, "--rules", ",".join(self.RULES)).stdout

    def test_csv_text_is_byte_identical(self):
        for path in (DEMO, SIMULATED):
            with self.subTest(path=path):
                self.assertEqual(al.replay_csv(path, rules=self.RULES), self.cli_csv(path))

    def test_alpha_and_parameters_reach_the_rules(self):
        expected = cli("replay", DEMO, "--rules", "saffron,addis", "--alpha", "0.1").stdout
        self.assertEqual(al.replay_csv(DEMO, rules=["saffron", "addis"], alpha=0.1), expected)

    def expected_rows(self, path):
        lines = self.cli_csv(path).splitlines()
        header = lines[0].split(",")
        self.assertEqual(header, ["rule", "step", "id", "p_value", "level", "rejected", "wealth"])
        return [dict(zip(header, line.split(","))) for line in lines[1:]]

    def assert_rows_equal(self, got_rows, expected):
        self.assertEqual(len(got_rows), len(expected))
        for g, e in zip(got_rows, expected):
            self.assertEqual(g["rule"], e["rule"])
            self.assertEqual(int(g["step"]), int(e["step"]))
            self.assertEqual(g["id"], e["id"])
            # float(text) of the CLI's shortest round-trip form is the identical double.
            self.assertEqual(float(g["p_value"]), float(e["p_value"]))
            self.assertEqual(float(g["level"]), float(e["level"]))
            self.assertEqual(int(g["rejected"]), int(e["rejected"]))
            if e["wealth"] == "":
                self.assertTrue(g["wealth"] is None or g["wealth"] != g["wealth"])
            else:
                self.assertEqual(float(g["wealth"]), float(e["wealth"]))

    def test_list_of_dicts_in_and_out(self):
        import csv
        with open(DEMO, newline="") as f:
            rows = list(csv.DictReader(f))
        got = al.replay(rows, rules=self.RULES, as_frame=False)
        self.assertIsInstance(got, list)
        self.assert_rows_equal(got, self.expected_rows(DEMO))

    @unittest.skipIf(pd is None, "pandas is not installed")
    def test_dataframe_in_and_out(self):
        for path in (DEMO, SIMULATED):
            with self.subTest(path=path):
                frame = pd.read_csv(path, float_precision="round_trip")
                got = al.replay(frame, rules=self.RULES)
                self.assertIsInstance(got, pd.DataFrame)
                self.assert_rows_equal(got.to_dict(orient="records"), self.expected_rows(path))

    @unittest.skipIf(pd is None, "pandas is not installed")
    def test_dataframe_with_parsed_times(self):
        frame = pd.read_csv(DEMO, float_precision="round_trip", parse_dates=["finished_at"])
        got = al.replay(frame, rules=self.RULES)
        self.assert_rows_equal(got.to_dict(orient="records"), self.expected_rows(DEMO))

    def test_bad_row_names_row_and_field(self):
        rows = [{"id": "a", "p_value": 0.01}, {"id": "b", "p_value": 1.3}]
        with self.assertRaises(al.InvalidInput) as ctx:
            al.replay(rows, as_frame=False)
        self.assertIn("rows:3", str(ctx.exception))  # line 1 is the header
        self.assertIn("p_value", str(ctx.exception))
        with self.assertRaises(al.InvalidInput) as ctx:
            al.replay([{"p_value": 0.01}], as_frame=False)
        self.assertIn("id", str(ctx.exception))


class SimulateLikeCli(unittest.TestCase):
    ARGS = dict(tests=400, runs=40, nonnull_fraction=0.2, seed=7, threads=2)

    def cli_csv(self, threads=2):
        return cli("simulate", "--rules", "lord++,saffron,bh", "--tests", "400", "--runs", "40",
                   "--nonnull-fraction", "0.2", "--seed", "7", "--threads", str(threads)).stdout

    def test_csv_text_is_byte_identical(self):
        self.assertEqual(al.simulate_csv(["lord++", "saffron", "bh"], **self.ARGS), self.cli_csv())

    def test_threads_do_not_change_the_result(self):
        args = dict(self.ARGS, threads=1)
        self.assertEqual(al.simulate_csv(["lord++", "saffron", "bh"], **args), self.cli_csv(threads=2))

    def test_rows_hold_the_cli_numbers(self):
        lines = self.cli_csv().splitlines()
        header = lines[0].split(",")
        rows = al.simulate(["lord++", "saffron", "bh"], as_frame=False, **self.ARGS)
        self.assertEqual(len(rows), len(lines) - 1)
        for row, line in zip(rows, lines[1:]):
            for key, text in zip(header, line.split(",")):
                if key == "rule":
                    self.assertEqual(row[key], text)
                elif text == "":
                    self.assertNotEqual(row[key], row[key])  # NaN where the CLI leaves the cell empty
                else:
                    self.assertEqual(float(row[key]), float(text), msg=key)

    @unittest.skipIf(pd is None, "pandas is not installed")
    def test_dataframe(self):
        frame = al.simulate(["lord++"], tests=100, runs=5, seed=1, threads=1)
        self.assertEqual(list(frame.columns), ["rule", "runs", "tests", "mean_rejections", "fdr", "fdr_se", "mfdr",
                                               "power", "power_se", "fwer", "evaluation"])
        self.assertEqual(frame["runs"].tolist(), [5])

    def test_gil_is_released(self):
        ticks = [0]
        stop = threading.Event()

        def count():
            while not stop.is_set():
                ticks[0] += 1
                time.sleep(0.001)

        t = threading.Thread(target=count)
        t.start()
        started = time.monotonic()
        al.simulate(["lord++", "saffron"], tests=2000, runs=400, seed=3, threads=1)
        elapsed = time.monotonic() - started
        stop.set()
        t.join()
        # Holding the GIL, the counter could not run at all during the call. With it released it
        # ticks about once a millisecond; a tenth of that is plenty of margin on a loaded machine.
        self.assertGreater(elapsed, 0.05, "the simulation was too short to tell")
        self.assertGreater(ticks[0], elapsed * 1000 * 0.1)

    def test_bad_model_names_the_field(self):
        with self.assertRaises(al.InvalidInput) as ctx:
            al.simulate(["lord++"], nonnull_fraction=1.5, runs=2, tests=10)
        self.assertTrue(str(ctx.exception).startswith("nonnull_fraction must be in [0, 1]"))  # the keyword, not the CLI flag


class Errors(unittest.TestCase):
    def test_bad_p_value(self):
        with self.assertRaises(al.InvalidInput) as ctx:
            al.Rule("lord++").record(1.3)
        self.assertEqual(ctx.exception.code, "invalid_input")
        self.assertIn("p_value", str(ctx.exception))
        with self.assertRaises(al.InvalidInput):
            al.Rule("lord++").record("x")

    def test_unknown_rule_same_message_as_cli(self):
        p = cli("replay", DEMO, "--rules", "lord+", ok=False)
        self.assertEqual(p.returncode, 2)
        with self.assertRaises(al.InvalidInput) as ctx:
            al.replay(DEMO, rules=["lord+"])
        self.assertEqual(str(ctx.exception), cli_error(p))
        with self.assertRaises(al.InvalidInput):
            al.Rule("lord+")
        self.assertTrue(issubclass(al.InvalidInput, al.Error))

    def test_parameter_a_rule_does_not_take(self):
        with self.assertRaises(al.InvalidInput) as ctx:
            al.Rule("lord++", payout=0.01)
        self.assertIn("payout", str(ctx.exception))

    def test_unknown_stream_and_locked_ledger(self):
        with tempfile.TemporaryDirectory() as d:
            path = os.path.join(d, "ledger")
            with al.Ledger(path) as ledger:
                ledger.create_stream("known", rule="lord++")
                with self.assertRaises(al.Refused) as ctx:
                    ledger.decide("unknown", id="t1", p_value=0.01)
                self.assertEqual(ctx.exception.code, "unknown_stream")
                unknown_message = str(ctx.exception)
                # Held here: the command line cannot open it (exit 4) and neither can a second handle.
                p = cli("--ledger", path, "decide", "known", "--id", "t1", "--p", "0.01", ok=False)
                self.assertEqual(p.returncode, 4, p.stderr)
                with self.assertRaises(al.StorageError) as ctx:
                    al.Ledger(path)
                self.assertEqual(ctx.exception.code, "busy")
                self.assertIn("lock", str(ctx.exception).lower())
            p = cli("--ledger", path, "decide", "unknown", "--id", "t1", "--p", "0.01", ok=False)
            self.assertEqual(p.returncode, 3)
            # The same library message; the command line alone adds the command to run next
            # (src/cli/cli_errors.cpp command_advice), which means nothing in Python.
            self.assertEqual(unknown_message + " (create it first: alphaledger new unknown --rule RULE)", cli_error(p))
            self.assertNotIn("alphaledger new", unknown_message)


class LedgerUse(unittest.TestCase):
    def test_create_decide_history_verify(self):
        with tempfile.TemporaryDirectory() as d:
            path = os.path.join(d, "ledger")
            with al.Ledger(path) as ledger:
                made = ledger.create_stream("checkout-team", rule="lord++")
                self.assertTrue(made["created"])
                self.assertFalse(ledger.create_stream("checkout-team", rule="lord++")["created"])
                with self.assertRaises(al.Refused):
                    ledger.create_stream("checkout-team", rule="saffron")
                for t, p in enumerate(P[:4]):
                    out = ledger.decide("checkout-team", id=f"exp-{t}", p_value=p)
                    # docs/methods.md 14.3 again, through the ledger.
                    self.assertAlmostEqual(out["level"] / LORD_LEVELS[t], 1.0, delta=1e-9)
                    self.assertEqual(bool(out["rejected"]), LORD_REJECTED[t])
                self.assertTrue(ledger.decide("checkout-team", id="exp-0", p_value=P[0])["repeat"])
                with self.assertRaises(al.Refused) as ctx:
                    ledger.decide("checkout-team", id="exp-0", p_value=0.5)
                self.assertEqual(ctx.exception.code, "conflict")
                rows = ledger.history("checkout-team", as_frame=False)
                self.assertEqual([r["id"] for r in rows], ["exp-0", "exp-1", "exp-2", "exp-3"])
                if pd is not None:
                    frame = ledger.history("checkout-team")
                    self.assertEqual(frame["step"].tolist(), [1, 2, 3, 4])
                self.assertEqual(ledger.status("checkout-team")["tests"], 4)
                v = ledger.verify("checkout-team")
                self.assertTrue(v["ok"])
                self.assertEqual(v["steps"], 4)
            # The command line reads the same history.
            p = cli("--ledger", path, "history", "checkout-team")
            self.assertEqual(len(p.stdout.strip().splitlines()), 5)

    def test_closed_handle(self):
        with tempfile.TemporaryDirectory() as d:
            ledger = al.Ledger(os.path.join(d, "l"))
            ledger.close()
            with self.assertRaises(al.InvalidInput):
                ledger.streams()


class Statistics(unittest.TestCase):
    def cli_json(self, *args):
        return json.loads(cli("--json", *args).stdout)

    def test_pvalue_proportions_like_cli(self):
        got = al.pvalue_proportions(control=(20000, 1000), treatment=(20000, 1180))
        want = self.cli_json("pvalue", "proportions", "--control", "20000:1000", "--treatment", "20000:1180")
        self.assertEqual(got["p_value"], want["p_value"])
        # R: prop.test(c(1180, 1000), c(20000, 20000), correct = FALSE)$p.value = 7.348e-05 (from memory).
        self.assertAlmostEqual(got["p_value"], 7.348e-05, delta=1e-8)

    def test_anytime_needs_mixture_sd(self):
        with self.assertRaises(al.InvalidInput) as ctx:
            al.pvalue_proportions(control=(20000, 1000), treatment=(20000, 1180), anytime=True)
        self.assertIn("mixture_sd", str(ctx.exception))
        got = al.pvalue_proportions(control=(20000, 1000), treatment=(20000, 1180), anytime=True, mixture_sd=0.005)
        self.assertGreaterEqual(got["anytime_p_value"], got["p_value"])

    def test_pvalue_means_welch(self):
        got = al.pvalue_means(control=(100, 10.0, 2.0), treatment=(120, 10.6, 2.5))
        self.assertIsNotNone(got["df"])
        self.assertTrue(0 < got["p_value"] < 1)

    def test_plan_proportions_like_cli(self):
        got = al.plan_proportions(baseline=0.05, min_effect=0.005, level=0.001)
        want = self.cli_json("plan", "proportions", "--baseline", "0.05", "--min-effect", "0.005", "--level", "0.001")
        self.assertEqual(got["n_per_arm"], want["n_per_arm"])

    def test_plan_means(self):
        got = al.plan_means(sd=1.0, min_effect=0.5)
        # R: power.t.test(delta = 0.5, sd = 1, power = 0.8)$n = 63.77 -> 64 per arm (from memory).
        self.assertEqual(got["n_per_arm"], 64)


if __name__ == "__main__":
    unittest.main()
