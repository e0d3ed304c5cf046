"""Tests of e-LOND streams and looks at running tests in the Python module, each against the command
line built beside it on the same ledger (the same JSON values), and of the errors bad input raises.
Run by ctest (test `python`) with PYTHONPATH at the built package and ALPHALEDGER_BINARY set."""

import json
import os
import subprocess
import tempfile
import unittest

import alphaledger as al

BINARY = os.environ.get("ALPHALEDGER_BINARY", "alphaledger")

try:
    import pandas as pd
except ImportError:
    pd = None


def cli(*args, ok=True):
    p = subprocess.run([BINARY, *args], capture_output=True, text=True, timeout=300)
    if ok and p.returncode != 0:
        raise AssertionError(f"alphaledger {' '.join(args)} exited {p.returncode}: {p.stderr}")
    return p


def cli_json(*args):
    lines = [line for line in cli("--json", *args).stdout.splitlines() if line.strip()]
    assert len(lines) == 1, lines
    return json.loads(lines[0])


class LedgerDir(unittest.TestCase):
    def setUp(self):
        self._dir = tempfile.TemporaryDirectory()
        self.path = os.path.join(self._dir.name, "ledger")

    def tearDown(self):
        self._dir.cleanup()

    def observed(self, stream):
        """What the CLI sees of a stream: equal before and after a refused call = ledger unchanged."""
        return [cli("--ledger", self.path, *args).stdout for args in
                (("--json", "status", stream), ("history", stream), ("running", stream), ("verify", stream))]


class ELondDecide(LedgerDir):
    def test_decide_with_e_values_like_cli(self):
        with al.Ledger(self.path) as ledger:
            created = ledger.create_stream("ev", rule="e-lond")
            self.assertEqual(created["rule"], "e-lond")
            ledger.launch("ev", id="b")
            got_a = ledger.decide("ev", id="a", e_value=5000)
            got_b = ledger.decide("ev", id="b", e_value=0.5)
        # e-LOND (Xu & Ramdas 2024): rejected iff e >= 1 / level; 5000 is far above 1 / level and
        # 0.5 < 1 <= 1 / level for any level <= 1 (from memory: e-LOND's rejection rule).
        self.assertEqual(got_a["rejected"], 1)
        self.assertEqual(got_b["rejected"], 0)
        self.assertNotIn("p_value", got_a)
        self.assertEqual(got_a["e_value"], 5000.0)
        # The same decisions again through the CLI are repeats and give the stored records.
        for got, e in ((got_a, "5000"), (got_b, "0.5")):
            want = cli_json("--ledger", self.path, "decide", "ev", "--id", got["id"], "--e", e)
            self.assertTrue(want.pop("repeat"))
            self.assertFalse(got.pop("repeat"))
            self.assertEqual(got, want)
        # history names the number e_value on an e-lond stream, as the CLI's history does.
        with al.Ledger(self.path) as ledger:
            rows = ledger.history("ev", as_frame=False)
        cli_rows = [json.loads(line) for line in
                    cli("--ledger", self.path, "--json", "history", "ev").stdout.splitlines() if line.strip()]
        self.assertEqual([r["e_value"] for r in rows], [r["e_value"] for r in cli_rows])
        self.assertTrue(all("p_value" not in r for r in rows))

    def test_explain_e_lond_stream_with_a_running_test_like_cli(self):
        with al.Ledger(self.path) as ledger:
            ledger.create_stream("ev", rule="e-lond")
            ledger.decide("ev", id="a", e_value=5000)
            ledger.launch("ev", id="r")
            ledger.decide("ev", id="c", e_value=2)
            got = {name: ledger.explain("ev", id=name) for name in ("a", "r", "c")}
            got_next = ledger.explain("ev")
        for name, e in got.items():
            want = cli_json("--ledger", self.path, "explain", "ev", "--id", name)
            self.assertEqual(e, want, msg=name)
            self.assertEqual(list(e), list(want), msg=name)  # the same keys in the same order
            self.assertEqual(list(e["running"]), ["explained_test_running", "reserved", "tests"])
        self.assertTrue(got["r"]["running"]["explained_test_running"])
        self.assertEqual([t["id"] for t in got["c"]["running"]["tests"]], ["r"])
        self.assertEqual(got["c"]["running"]["reserved"], got["r"]["level"])
        self.assertEqual(got_next, cli_json("--ledger", self.path, "explain", "ev"))

    def test_bad_decide_raises_the_right_class_and_changes_nothing(self):
        with al.Ledger(self.path) as ledger:
            ledger.create_stream("ev", rule="e-lond")
            ledger.create_stream("pv", rule="lord++")
            ledger.decide("ev", id="a", e_value=5000)
        before = {s: self.observed(s) for s in ("ev", "pv")}
        with al.Ledger(self.path) as ledger:
            cases = [
                (al.InvalidInput, dict(stream="ev", id="b"), "exactly one"),
                (al.InvalidInput, dict(stream="ev", id="b", p_value=0.01, e_value=3), "exactly one"),
                (al.InvalidInput, dict(stream="ev", id="b", p_value=0.01), "e_value"),
                (al.InvalidInput, dict(stream="pv", id="b", e_value=3), "p_value"),
                (al.InvalidInput, dict(stream="ev", id="b", e_value=-1), "e_value"),
                (al.InvalidInput, dict(stream="ev", id="b", e_value=float("nan")), "e_value"),
                (al.InvalidInput, dict(stream="ev", id="b", e_value="many"), "e_value"),
                (al.Refused, dict(stream="ev", id="a", e_value=6), "5000"),
                (al.Refused, dict(stream="nope", id="a", e_value=6), "nope"),
            ]
            for cls, kwargs, words in cases:
                with self.subTest(kwargs=kwargs):
                    stream = kwargs.pop("stream")
                    with self.assertRaises(cls) as ctx:
                        ledger.decide(stream, **kwargs)
                    self.assertIn(words, str(ctx.exception))
                    self.assertIsInstance(ctx.exception, al.Error)
        self.assertEqual({s: self.observed(s) for s in ("ev", "pv")}, before)


class Looks(LedgerDir):
    def test_looks_like_cli_proportions_then_stop(self):
        with al.Ledger(self.path) as ledger:
            ledger.create_stream("shop", rule="lord++")
            ledger.launch("shop", id="t")
            first = ledger.look("shop", id="t", control=(9000, 450), treatment=(9000, 470), mixture_sd=0.01)
            again = ledger.look("shop", id="t", control=(9000, 450), treatment=(9000, 470))
            last = ledger.look("shop", id="t", control=(20000, 1000), treatment=(20000, 1400))
            listed = ledger.looks("shop", id="t", as_frame=False)
        self.assertEqual(first["verdict"], "continue")
        self.assertIsNone(first["decision"])
        self.assertTrue(again["repeat"])
        self.assertEqual({**again, "repeat": False}, first)
        # 5% vs 7% on 20000 users per arm: z about 8.4 (two-proportion z-test, common practice), so
        # the always-valid p-value is far below the first LORD++ level 0.00137 (docs/methods.md 14.3).
        self.assertEqual(last["verdict"], "stop")
        self.assertEqual(last["decision"]["rejected"], 1)
        self.assertEqual(last["decision"]["id"], "t")
        self.assertEqual(last["decision"]["level"], last["level"])
        want = cli_json("--ledger", self.path, "looks", "shop", "--id", "t")
        self.assertEqual(want["stream"], "shop")
        self.assertEqual(listed, want["looks"])
        self.assertEqual([list(x) for x in listed], [list(x) for x in want["looks"]])  # key order too
        self.assertEqual(listed, [first, last])
        # The last look again through the CLI: its stored answer, a repeat.
        repeat = cli_json("--ledger", self.path, "look", "shop", "--id", "t", "--control", "20000:1000",
                          "--treatment", "20000:1400")
        self.assertTrue(repeat["repeat"])
        self.assertEqual(repeat["look"], last["look"])
        self.assertEqual(repeat["running_min"], last["running_min"])
        self.assertEqual(repeat["e_value"], last["e_value"])

    def test_means_look_on_e_lond_like_cli(self):
        with al.Ledger(self.path) as ledger:
            ledger.create_stream("ev", rule="e-lond")
            ledger.launch("ev", id="m")
            got = ledger.look("ev", id="m", control=(500, 12.5, 4.2), treatment=(500, 12.9, 4.0), mixture_sd=0.5)
        self.assertEqual(got["summary"], "means")
        self.assertEqual(got["control"], {"n": 500, "mean": 12.5, "sd": 4.2})
        want = cli_json("--ledger", self.path, "looks", "ev", "--id", "m")["looks"]
        self.assertEqual([got], want)
        # The CLI's look with the same data is a repeat of the same answer.
        again = cli_json("--ledger", self.path, "look", "ev", "--id", "m", "--control", "500:12.5:4.2",
                         "--treatment", "500:12.9:4")
        self.assertEqual({**again, "repeat": False}, got)

    @unittest.skipIf(pd is None, "pandas is not installed")
    def test_looks_as_frame(self):
        with al.Ledger(self.path) as ledger:
            ledger.create_stream("shop", rule="lord++")
            ledger.launch("shop", id="t")
            ledger.look("shop", id="t", control=(9000, 450), treatment=(9000, 470), mixture_sd=0.01)
            ledger.look("shop", id="t", control=(9500, 470), treatment=(9500, 500))
            frame = ledger.looks("shop", id="t")
            rows = ledger.looks("shop", id="t", as_frame=False)
        self.assertEqual(list(frame.columns), list(rows[0]))
        self.assertEqual(list(frame["look"]), [1, 2])
        self.assertEqual(list(frame["running_min"]), [r["running_min"] for r in rows])
        self.assertEqual(frame["control"][1], {"n": 9500, "conversions": 470})

    def test_bad_looks_raise_the_right_class_and_change_nothing(self):
        with al.Ledger(self.path) as ledger:
            ledger.create_stream("shop", rule="lord++")
            ledger.launch("shop", id="t")
            ledger.look("shop", id="t", control=(9000, 450), treatment=(9000, 470), mixture_sd=0.01)
            ledger.decide("shop", id="done", p_value=0.5)
        before = self.observed("shop")
        looks_before = cli("--ledger", self.path, "--json", "looks", "shop", "--id", "t").stdout
        ok = dict(control=(9100, 455), treatment=(9100, 475))
        cases = [
            (al.InvalidInput, dict(id="t", control=(9100, 455), treatment=(9100, 4.2, 1.0)), "both"),
            (al.InvalidInput, dict(id="t", control=(9100,), treatment=(9100, 475)), "control"),
            (al.InvalidInput, dict(id="t", control="9100:455", treatment=(9100, 475)), "control"),
            (al.InvalidInput, dict(id="t", control=(9100, 455), treatment=(-1, 0)), "treatment n"),
            (al.InvalidInput, dict(id="t", control=(9100, 4.5), treatment=(9100, 475)), "control conversions"),
            (al.InvalidInput, dict(id="t", control=(2 ** 70, 1), treatment=(9100, 475)), "control n"),
            (al.InvalidInput, dict(id="t", control=(8000, 400), treatment=(9100, 475)), "control"),  # counts down
            (al.InvalidInput, dict(id="t", mixture_sd=0.02, **ok), "mixture_sd"),  # another mixing scale
            (al.InvalidInput, dict(id="t", mixture_sd=-1.0, **ok), "mixture_sd"),
            (al.InvalidInput, dict(id="t", control=(9100, 9200), treatment=(9100, 475)), "control"),
            (al.Refused, dict(id="never", mixture_sd=0.01, **ok), "never"),
            (al.Refused, dict(id="done", mixture_sd=0.01, **ok), "done"),
        ]
        with al.Ledger(self.path) as ledger:
            for cls, kwargs, words in cases:
                with self.subTest(kwargs=kwargs):
                    with self.assertRaises(cls) as ctx:
                        ledger.look("shop", **kwargs)
                    self.assertIn(words, str(ctx.exception))
            with self.assertRaises(al.Refused) as ctx:
                ledger.look("nope", id="t", mixture_sd=0.01, **ok)
            self.assertEqual(ctx.exception.code, "unknown_stream")
            with self.assertRaises(al.Refused) as ctx:
                ledger.looks("shop", id="never")
            self.assertEqual(ctx.exception.code, "unknown_test")
        self.assertEqual(self.observed("shop"), before)
        self.assertEqual(cli("--ledger", self.path, "--json", "looks", "shop", "--id", "t").stdout, looks_before)

    def test_first_look_needs_mixture_sd(self):
        with al.Ledger(self.path) as ledger:
            ledger.create_stream("shop", rule="lord++")
            ledger.launch("shop", id="t")
            with self.assertRaises(al.InvalidInput) as ctx:
                ledger.look("shop", id="t", control=(9000, 450), treatment=(9000, 470))
            self.assertIn("mixture_sd", str(ctx.exception))
            self.assertEqual(ledger.looks("shop", id="t", as_frame=False), [])


if __name__ == "__main__":
    unittest.main()
