"""alphaledger in Python: online false discovery rate control over a stream of tests.

The numbers come from the same C++ core as the ``alphaledger`` command line, so a replay or a
simulation gives the same levels and decisions, bit for bit. pandas is optional: functions that
return tables give a ``pandas.DataFrame`` when pandas can be imported, else a list of dicts.

Every error raised here derives from :class:`Error`: :class:`InvalidInput` (the input or a
parameter is wrong), :class:`Refused` (unknown stream, no ledger, a conflict with what the ledger
holds, a verification mismatch) and :class:`StorageError` (the ledger is locked, damaged, or the
disk failed). Each carries ``.code``, the machine word the command line prints in JSON errors.
See docs/python.md.
"""

from __future__ import annotations

import io
import math
import os
from typing import Any, Iterable, Mapping, Optional, Sequence, Union

from . import _native
from ._native import Error, InvalidInput, Outcome, Refused, Reservation, RunningTest, StorageError

__all__ = [
    "Error", "InvalidInput", "Refused", "StorageError",
    "Outcome", "Reservation", "RunningTest",
    "Rule", "Ledger", "replay", "replay_csv", "simulate", "simulate_csv", "explain",
    "pvalue_proportions", "pvalue_means", "plan_proportions", "plan_means", "format_number",
]

__version__ = "0.1.0"

_RULE_PARAMETERS = ("initial_wealth", "candidate_threshold", "discard_threshold", "payout", "spending",
                    "evaluation")


def _pandas():
    """pandas if it can be imported, else None (imported only when a table is returned)."""
    try:
        import pandas  # noqa: PLC0415
    except ImportError:
        return None
    return pandas


def _table(rows: list, columns: Sequence[str], as_frame: Optional[bool]):
    pd = _pandas() if as_frame is not False else None
    if as_frame and pd is None:
        raise InvalidInput("as_frame=True needs pandas, which cannot be imported")
    if pd is None:
        return rows
    return pd.DataFrame(rows, columns=list(columns))


def _params(alpha: Optional[float], params: Mapping[str, Any]) -> dict:
    out = {"alpha": alpha} if alpha is not None else {}
    out.update(params)
    return out


def format_number(value: float) -> str:
    """The text the command line writes for a number: the shortest form that reads back exactly."""
    return _native.format_number(float(value))


class Rule:
    """One online testing rule held in memory (no ledger).

    ``Rule(name, alpha=0.05, **params)``: ``name`` is one of alpha-spending, alpha-investing, lond,
    lord++, saffron, addis, e-lond. ``params`` are the rule's own parameters: initial_wealth,
    candidate_threshold, discard_threshold, payout, spending, evaluation (docs/rules.md); a
    parameter the rule does not take raises :class:`InvalidInput`.
    """

    def __init__(self, name: str, alpha: float = 0.05, **params: Any) -> None:
        self._rule = _native.NativeRule(name, _params(alpha, params))

    @property
    def name(self) -> str:
        """The rule's name, e.g. ``"lord++"``."""
        return self._rule.name

    @property
    def configuration(self) -> str:
        """The complete configuration in one line, defaults filled in."""
        return self._rule.configuration

    @property
    def tests(self) -> int:
        """Tests launched so far (recorded tests included)."""
        return self._rule.tests

    @property
    def rejections(self) -> int:
        """Rejections so far."""
        return self._rule.rejections

    @property
    def wealth(self) -> float:
        """The alpha-wealth now."""
        return self._rule.wealth

    def next_level(self) -> float:
        """The level the next test would get; changes nothing."""
        return self._rule.next_level()

    def record(self, p_value: float) -> Outcome:
        """Decides one test with its p-value and advances the rule (``launch`` then ``finish``).

        Returns an :class:`Outcome` with ``.step``, ``.level``, ``.rejected`` and ``.wealth``.
        """
        return self._rule.record(_number(p_value, "p_value"))

    def record_e(self, e_value: float) -> Outcome:
        """Decides one test of an e-value rule (e-lond): rejected when ``e_value >= 1 / level``."""
        return self._rule.record_e(_number(e_value, "e_value"))

    def launch(self) -> Reservation:
        """Reserves the next test's level now (a test that starts before earlier ones finish)."""
        return self._rule.launch()

    def finish(self, launch: Union[int, Reservation], p_value: float) -> Outcome:
        """Decides running test ``launch`` (its number or its :class:`Reservation`) against its reserved level."""
        return self._rule.finish(_launch_number(launch), _number(p_value, "p_value"))

    def abandon(self, launch: Union[int, Reservation]) -> None:
        """Ends running test ``launch`` without a p-value: no rejection, nothing earned."""
        self._rule.abandon(_launch_number(launch))

    def running(self) -> list:
        """The tests launched and not yet finished or abandoned, in launch order."""
        return self._rule.running()

    @property
    def reserved(self) -> float:
        """The sum of the levels reserved for the running tests."""
        return self._rule.reserved

    def explain(self) -> dict:
        """Why the next test gets its level: the same as :func:`explain` (``explain(rule)``)."""
        return explain(self)

    def __repr__(self) -> str:
        return f"Rule({self.configuration!r}, tests={self.tests})"


def _launch_number(launch: Union[int, Reservation]) -> int:
    if isinstance(launch, Reservation):
        return launch.launch
    if isinstance(launch, bool) or not isinstance(launch, int) or launch < 1:
        raise InvalidInput(f"launch must be a launch number (a whole number >= 1) or a Reservation, "
                           f"got {str(launch)[:40]}")
    return launch


def _number(value: Any, field: str) -> float:
    if isinstance(value, bool):
        raise InvalidInput(f"{field} must be a number, got a bool")
    try:
        return float(value)
    except (TypeError, ValueError):
        raise InvalidInput(f"{field} must be a number, got {str(value)[:40]!r}") from None


# ---- Replay ------------------------------------------------------------------------------------

_REPLAY_COLUMNS = ("rule", "step", "id", "p_value", "level", "rejected", "wealth")


def _cell(value: Any) -> str:
    """A cell as the CSV reader reads it: numbers in a form that reads back exactly, times in ISO 8601."""
    if value is None:
        return ""
    if hasattr(value, "isoformat"):  # datetime, pandas Timestamp
        text = value.isoformat()
        return text + "Z" if getattr(value, "tzinfo", None) is None and "T" in text else text
    if hasattr(value, "item") and not isinstance(value, (str, bytes)):  # numpy scalar
        value = value.item()
    if isinstance(value, bool):
        return "1" if value else "0"
    if isinstance(value, float):
        return "" if math.isnan(value) else repr(value)  # repr reads back to the identical double
    return str(value)


def _rows_of(log: Any) -> Iterable[Mapping[str, Any]]:
    pd = None
    if hasattr(log, "to_dict") and hasattr(log, "columns"):
        pd = _pandas()
    if pd is not None and isinstance(log, pd.DataFrame):
        return log.to_dict(orient="records")
    return log


def _log_text(log: Any) -> str:
    """A DataFrame or a list of dicts as CSV text, read by the C++ log reader (the CLI's rules)."""
    import csv  # noqa: PLC0415

    rows = list(_rows_of(log))
    columns: dict = {}
    for n, row in enumerate(rows, start=1):
        if not isinstance(row, Mapping):
            raise InvalidInput(f"row {n}: each row must be a dict of column -> value, got {type(row).__name__}")
        for key in row:
            columns.setdefault(str(key), None)
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\n")
    writer.writerow(list(columns))
    for row in rows:
        cells = {str(k): v for k, v in row.items()}
        writer.writerow([_cell(cells.get(c)) for c in columns])
    return out.getvalue()


def _replay(log, rules, alpha, format, alternative, params, csv, report):
    if isinstance(rules, str):
        rules = [rules]
    p = _params(alpha, params)
    report = None if report is None else os.fspath(report)
    if isinstance(log, (str, os.PathLike)):
        return _native.replay(os.fspath(log), None, "", list(rules), p, format, alternative, csv, report)
    return _native.replay(None, _log_text(log), "rows", list(rules), p, None, alternative, csv, report)


def replay(log: Any, rules: Union[str, Sequence[str]] = ("lord++",), alpha: Optional[float] = None, *,
           format: Optional[str] = None, alternative: Optional[str] = None,
           report: Optional[Union[str, os.PathLike]] = None, as_frame: Optional[bool] = None, **params: Any):
    """Decides a whole log of finished tests with each rule in turn, touching no ledger.

    ``log`` is a pandas DataFrame, a list of dicts, or a path to a CSV / JSON Lines file, with
    columns ``id`` and ``p_value`` (or summary columns, turned into p-values in the direction
    ``alternative``: two-sided by default, greater or less), ``e_value`` for the e-value rules
    (e-lond, e-bh), optionally ``finished_at`` (tests are decided in that order), ``launched_at``
    (levels are reserved at launch) and ``is_null``. ``rules`` may also name the hindsight
    baselines bh, storey-bh and e-bh. ``alpha`` and ``params`` apply to every rule that takes them.

    Returns one row per rule and test with columns rule, step, id, p_value, level, rejected,
    wealth: the numbers of ``alphaledger replay`` exactly. A log with launch times adds ``launch``
    after step (None for the baselines); a log with e-values adds ``e_value`` after p_value
    (p_value is None when the log has none). A DataFrame when pandas is available
    (``as_frame=False`` forces a list of dicts). ``report="replay.html"`` also writes the page of
    ``replay --report`` (the same writer). Rows given in memory are read as the CSV form of
    the table, so an error names ``rows:N``, N being the row's line in that form (line 1 is the
    header: the first row is ``rows:2``), or ``file:line`` for a file, and the field.
    """
    cols = _replay(log, rules, alpha, format, alternative, params, False, report)
    names = list(cols["columns"])
    n = len(cols["rule"])
    pd = _pandas() if as_frame is not False else None
    if as_frame and pd is None:
        raise InvalidInput("as_frame=True needs pandas, which cannot be imported")
    if pd is not None:
        return pd.DataFrame({c: cols[c] for c in names}, columns=names)
    return [{c: cols[c][i] for c in names} for i in range(n)]


def replay_csv(log: Any, rules: Union[str, Sequence[str]] = ("lord++",), alpha: Optional[float] = None, *,
               format: Optional[str] = None, alternative: Optional[str] = None,
               report: Optional[Union[str, os.PathLike]] = None, **params: Any) -> str:
    """:func:`replay` as the CSV text ``alphaledger replay`` prints, byte for byte."""
    return _replay(log, rules, alpha, format, alternative, params, True, report)


def explain(rule: "Rule") -> dict:
    """Why the next test of ``rule`` gets its level: the rule's formula with the numbers filled in.

    Returns the object of ``alphaledger explain --json``: ``rule``, ``evaluation``, ``test`` (the
    test number the level is for), ``display`` (the formula in words), ``level`` (equal to
    ``rule.next_level()``, bit for bit), ``uncapped`` (the sum of the terms), ``terms`` (dicts
    with ``kind``, ``rejection``, ``test``, ``lag``, ``weight``, ``base``, ``scale`` and
    ``amount``; the amounts add up to ``uncapped``, to rounding) and ``cap`` (``{"what",
    "value"}`` when a cap bound the level, else None) and ``running`` (``{"explained_test_running",
    "reserved", "tests"}``: the tests launched and not finished when the level was set, each
    ``{"id", "launch", "level"}``; a Rule does not know test ids, so ``id`` is None there).
    ``stream`` and ``id`` are None here; see :meth:`Ledger.explain` for a stream of the ledger.
    """
    if not isinstance(rule, Rule):
        raise InvalidInput(f"explain takes a Rule, got {type(rule).__name__}")
    return _native.explain(rule._rule)


# ---- Simulate ----------------------------------------------------------------------------------

_SIMULATE_COLUMNS = ("rule", "runs", "tests", "mean_rejections", "fdr", "fdr_se", "mfdr", "power", "power_se",
                     "fwer", "evaluation")


def _simulate(rules, tests, runs, nonnull_fraction, seed, threads, effect, effect_sd, null_mean, pattern,
              correlation, mean_duration, peeking, mixture_sd, alpha, params, csv, report):
    if isinstance(rules, str):
        rules = [rules]
    if threads is None:
        threads = max(1, os.cpu_count() or 1)
    for name, v in (("tests", tests), ("runs", runs), ("seed", seed), ("threads", threads), ("peeking", peeking)):
        if isinstance(v, bool) or not isinstance(v, int) or v < 0:
            raise InvalidInput(f"{name} must be a whole number >= 0, got {str(v)[:40]}")
    return _native.simulate(list(rules), _params(alpha, params), tests, runs, _number(nonnull_fraction,
                            "nonnull_fraction"), _number(effect, "effect"), _number(effect_sd, "effect_sd"),
                            _number(null_mean, "null_mean"), pattern, correlation,
                            _number(mean_duration, "mean_duration"), peeking,
                            None if mixture_sd is None else _number(mixture_sd, "mixture_sd"), seed, threads, csv,
                            None if report is None else os.fspath(report))


def simulate(rules: Union[str, Sequence[str]] = ("lord++",), *, tests: int = 1000, runs: int = 100,
             nonnull_fraction: float = 0.1, seed: int = 1, threads: Optional[int] = None, effect: float = 3,
             effect_sd: float = 0, null_mean: float = 0, pattern: str = "constant", correlation: str = "none",
             mean_duration: float = 0, peeking: int = 0, mixture_sd: Optional[float] = None,
             alpha: Optional[float] = None, report: Optional[str] = None, as_frame: Optional[bool] = None,
             **params: Any):
    """Simulates ``runs`` streams of ``tests`` tests and measures each rule's error rates and power.

    The model and its defaults are those of ``alphaledger simulate`` (docs/simulate.md):
    ``nonnull_fraction`` of the tests are non-null with z-mean ``effect`` (spread ``effect_sd``),
    nulls have mean ``null_mean``; ``pattern`` places the non-nulls (constant, bursts, rising,
    falling) and ``correlation`` ties neighbouring tests (none, ar1:RHO, blocks:SIZE:RHO).
    ``mean_duration`` > 0 makes tests overlap (each runs while a geometric number of later tests
    launch, with this mean; levels are reserved at launch). ``peeking=K`` looks at each test K
    times as its data arrive and adds rows per rule (``R:peek-fixed``, ``R:peek-anytime``,
    ``e-lond:peek-mixture``); ``mixture_sd`` is then the mixing scale of the always-valid evidence
    (default: the effect). As on the command line, lord++, saffron and addis use the fast
    evaluation unless ``evaluation`` says otherwise. ``threads`` (default: every core) does not
    change the result. The GIL is released while it runs. ``report`` also writes the HTML page of
    ``simulate --report``.

    Returns one row per rule: rule, runs, tests, mean_rejections, fdr, fdr_se, mfdr, power,
    power_se, fwer (NaN where the command line leaves a cell empty), and evaluation (exact or
    fast for lord++, saffron and addis, else None; as in ``simulate --json``).
    """
    rows = _simulate(rules, tests, runs, nonnull_fraction, seed, threads, effect, effect_sd, null_mean, pattern,
                     correlation, mean_duration, peeking, mixture_sd, alpha, params, False, report)
    return _table(rows, _SIMULATE_COLUMNS, as_frame)


def simulate_csv(rules: Union[str, Sequence[str]] = ("lord++",), *, tests: int = 1000, runs: int = 100,
                 nonnull_fraction: float = 0.1, seed: int = 1, threads: Optional[int] = None, effect: float = 3,
                 effect_sd: float = 0, null_mean: float = 0, pattern: str = "constant",
                 correlation: str = "none", mean_duration: float = 0, peeking: int = 0,
                 mixture_sd: Optional[float] = None, alpha: Optional[float] = None, **params: Any) -> str:
    """:func:`simulate` as the CSV text ``alphaledger simulate`` prints, byte for byte."""
    return _simulate(rules, tests, runs, nonnull_fraction, seed, threads, effect, effect_sd, null_mean, pattern,
                     correlation, mean_duration, peeking, mixture_sd, alpha, params, True, None)


# ---- The ledger --------------------------------------------------------------------------------

_HISTORY_COLUMNS = ("step", "id", "p_value", "level", "rejected", "wealth", "decided_at", "launch", "reserved_at",
                    "abandoned")
_RUNNING_COLUMNS = ("id", "launch", "level", "launched_at")
_LOOK_COLUMNS = ("stream", "id", "look", "launch", "step", "summary", "control", "treatment", "mixture_sd",
                 "estimate", "anytime_p_value", "running_min", "e_value", "cs_low", "cs_high", "level", "verdict",
                 "looked_at", "decision", "repeat")


def _look_arm(value: Any, field: str) -> tuple:
    """An arm of a look: ("proportions", (n, conversions)) or ("means", (n, mean, sd))."""
    if not isinstance(value, (tuple, list)) or len(value) not in (2, 3):
        raise InvalidInput(f"{field} must be (n, conversions) (proportions) or (n, mean, sd) (means), "
                           f"cumulative so far; got {str(value)[:40]}")
    n = _whole(value[0], f"{field} n")
    if n > 2 ** 53:
        raise InvalidInput(f"{field} n must be at most 2^53, got {str(n)[:40]}")
    if len(value) == 2:
        x = _whole(value[1], f"{field} conversions")
        if x > 2 ** 53:
            raise InvalidInput(f"{field} conversions must be at most 2^53, got {str(x)[:40]}")
        return "proportions", (n, x)
    return "means", (n, _number(value[1], f"{field} mean"), _number(value[2], f"{field} sd"))


class Ledger:
    """A durable ledger folder (RocksDB), created when absent. Use it as a context manager::

        with alphaledger.Ledger("alphaledger.db") as ledger:
            ledger.create_stream("checkout-team", rule="lord++")
            ledger.decide("checkout-team", id="exp-0142", p_value=0.0004)

    Only one process may hold a ledger open: a second one raises :class:`StorageError` (busy).
    """

    def __init__(self, path: Union[str, os.PathLike]) -> None:
        self._ledger = _native.NativeLedger(os.fspath(path))

    def __enter__(self) -> "Ledger":
        return self

    def __exit__(self, *exc: Any) -> None:
        self.close()

    def close(self) -> None:
        """Closes the ledger and releases its lock; later calls raise :class:`InvalidInput`."""
        self._ledger.close()

    @property
    def path(self) -> str:
        """The ledger folder."""
        return self._ledger.path

    def create_stream(self, name: str, rule: str = "lord++", alpha: Optional[float] = None,
                      **params: Any) -> dict:
        """Creates stream ``name`` deciding with ``rule``; the same call again changes nothing.

        Another configuration under an existing name raises :class:`Refused`. Returns the stream's
        status with ``created`` (False when it existed already).
        """
        return self._ledger.create_stream(name, rule, _params(alpha, params))

    def decide(self, stream: str, *, id: str, p_value: Optional[float] = None,
               e_value: Optional[float] = None) -> dict:
        """Decides test ``id`` of ``stream`` with ``p_value``, durably, and returns the decision.

        A stream whose rule takes e-values (``e-lond``) is decided with ``e_value`` instead (finite,
        >= 0; rejected when ``e_value >= 1 / level``); give exactly one of the two, the one the
        stream's rule takes (the other raises :class:`InvalidInput`, the ledger unchanged).
        The same id with the same number returns the stored decision (``repeat`` True); with
        another number it raises :class:`Refused`. A test launched with :meth:`launch` is decided
        against the level reserved at its launch. Keys: step, id, p_value (e_value for an e-value),
        level, rejected, wealth, decided_at, launch, launched_at, stream, repeat.
        """
        if (p_value is None) == (e_value is None):
            raise InvalidInput("decide needs exactly one of p_value (p-value streams) or e_value (e-lond streams)")
        if e_value is not None:
            return self._ledger.decide(stream, id, _number(e_value, "e_value"), True)
        return self._ledger.decide(stream, id, _number(p_value, "p_value"), False)

    def history(self, stream: str, *, as_frame: Optional[bool] = None):
        """Every decided or abandoned test of ``stream`` in step order, as ``alphaledger history``.

        Columns: step, id, p_value, level, rejected, wealth, decided_at, launch (launch number),
        reserved_at (when the test was launched and its level reserved), abandoned (True for a
        test abandoned before it was decided: p_value 0, rejected 0, decided_at when it was
        abandoned). Tests still running are not listed (see :meth:`running`). On an e-lond stream
        the number is named e_value instead of p_value, as in the CLI's history.
        """
        rows = self._ledger.history(stream)
        columns = _HISTORY_COLUMNS
        if rows and "e_value" in rows[0]:
            columns = tuple("e_value" if c == "p_value" else c for c in columns)
        return _table(rows, columns, as_frame)

    def status(self, stream: str) -> dict:
        """The stream's configuration, counts, wealth, next level, ``running`` (tests launched and not
        yet decided or abandoned) and ``reserved`` (the sum of their levels)."""
        return self._ledger.status(stream)

    def launch(self, stream: str, *, id: str) -> dict:
        """Launches test ``id`` of ``stream``: reserves its level now, durably, and returns it.

        Decide it later with :meth:`decide` (against this level) or end it with :meth:`abandon`.
        The same id while it runs returns the stored reservation (``repeat`` True); an id already
        decided or abandoned raises :class:`Refused`. Keys: stream, id, launch, level, wealth,
        launched_at, step, repeat.
        """
        return self._ledger.launch(stream, id)

    def abandon(self, stream: str, *, id: str) -> dict:
        """Ends running test ``id`` of ``stream`` without a p-value: never decided, its level not refunded.

        Keys: stream, id, launch, level, wealth, launched_at, abandoned_at, step, repeat. An id that
        was never launched raises :class:`Refused` (code ``unknown_test``), a decided one too.
        """
        return self._ledger.abandon(stream, id)

    def running(self, stream: str, *, as_frame: Optional[bool] = None):
        """The tests of ``stream`` launched and not yet decided or abandoned, in launch order.

        Columns: id, launch, level (reserved at launch), launched_at.
        """
        return _table(self._ledger.running(stream), _RUNNING_COLUMNS, as_frame)

    def explain(self, stream: str, id: Optional[str] = None) -> dict:
        """Why a test of ``stream`` gets its level, as ``alphaledger explain STREAM --json``.

        Without ``id``: the level of the next test. With ``id``: the level test ``id`` got (decided)
        or reserved at its launch (still running). The dict is that of :func:`explain` with
        ``stream`` and ``id`` filled in, built by the same code as the command line's, so equal to
        its JSON key for key and in order; its ``terms``' amounts add up to ``uncapped``,
        ``level`` is the stored level, bit for bit, and ``running`` names the tests that were
        running when it was set. An abandoned ``id`` or an unknown one raises :class:`Refused`.
        """
        return self._ledger.explain(stream, id)

    def look(self, stream: str, *, id: str, control: Sequence[float], treatment: Sequence[float],
             mixture_sd: Optional[float] = None) -> dict:
        """Looks at running test ``id`` of ``stream``, as ``alphaledger look ... --json``.

        ``control`` and ``treatment`` are the cumulative summaries so far, both ``(n, conversions)``
        (proportions) or both ``(n, mean, sd)`` (a numeric metric). ``mixture_sd`` (about the effect
        hoped for, on the scale of the estimate) is needed at a test's first look and kept for its
        later looks. The answer gives the always-valid p-value of this look, its running minimum,
        the e-value, the confidence sequence and ``verdict``: ``"stop"`` decides the test in the
        same write (``decision``), ``"continue"`` leaves it running. The same data again returns
        the stored answer (``repeat`` True). Keys: stream, id, look, launch, step, summary,
        control, treatment, mixture_sd, estimate, anytime_p_value, running_min, e_value, cs_low,
        cs_high, level, verdict, looked_at, decision, repeat.
        """
        summary, c = _look_arm(control, "control")
        other, t = _look_arm(treatment, "treatment")
        if summary != other:
            raise InvalidInput("control and treatment must both be (n, conversions) (proportions) or both "
                               "(n, mean, sd) (means)")
        return self._ledger.look(stream, id, summary, c, t,
                                 None if mixture_sd is None else _number(mixture_sd, "mixture_sd"))

    def looks(self, stream: str, *, id: str, as_frame: Optional[bool] = None):
        """The looks at test ``id`` of ``stream``, oldest first, as ``alphaledger looks ... --json``.

        Each row is the dict :meth:`look` returned for it (``control``, ``treatment`` and
        ``decision`` stay dicts inside a DataFrame). A test never looked at gives no rows.
        """
        return _table(self._ledger.looks(stream, id), _LOOK_COLUMNS, as_frame)

    def report(self, stream: str, path: Union[str, os.PathLike]) -> dict:
        """Writes the HTML page of ``stream`` to ``path``, as ``alphaledger report STREAM -o PATH``.

        The same writer as the command line makes the same page (docs/reports.md). The file is
        replaced in one step. Returns ``{"report": "stream", "stream", "tests", "path"}``.
        """
        return self._ledger.report(stream, os.fspath(path))

    def streams(self) -> list:
        """The status of every stream, by name."""
        return self._ledger.streams()

    def next_level(self, stream: str) -> float:
        """The level the next test of ``stream`` would get now; changes nothing."""
        return self._ledger.next_level(stream)

    def verify(self, stream: str, anchors: Sequence[str] = ()) -> dict:
        """Recomputes every decision of ``stream`` from its p-values and checks the hash chain.

        ``anchors`` are ``"STEP:HASH"`` / ``"closed:HASH"`` texts noted from earlier results.
        Returns a dict with ``ok``; a mismatch is reported in it (``problem``), not raised.
        """
        return self._ledger.verify(stream, list(anchors))

    def close_stream(self, stream: str) -> dict:
        """Ends ``stream``: no more tests; its history stays readable and verifiable."""
        return self._ledger.close_stream(stream)

    def __repr__(self) -> str:
        return f"Ledger({self.path!r})"


# ---- Statistics --------------------------------------------------------------------------------


def _arm(value: Any, field: str, size: int) -> tuple:
    if not isinstance(value, (tuple, list)) or len(value) != size:
        what = "(n, conversions)" if size == 2 else "(n, mean, sd)"
        raise InvalidInput(f"{field} must be a pair {what}" if size == 2 else f"{field} must be {what}")
    return tuple(value)


def _whole(value: Any, field: str) -> int:
    if isinstance(value, bool) or not isinstance(value, int) or value < 0:
        raise InvalidInput(f"{field} must be a whole number >= 0, got {str(value)[:40]}")
    return value


def pvalue_proportions(*, control: Sequence[int], treatment: Sequence[int], method: str = "pooled",
                       alternative: str = "two-sided", confidence: float = 0.95, anytime: bool = False,
                       mixture_sd: Optional[float] = None) -> dict:
    """The p-value of a conversion experiment: ``control=(n, conversions)``, ``treatment=(n, conversions)``.

    ``method``: pooled (z-test, default), unpooled or fisher. ``anytime=True`` adds the always-valid
    p-value, e-value and confidence sequence (needs ``mixture_sd``, about the effect hoped for).
    """
    cn, cx = _arm(control, "control", 2)
    tn, tx = _arm(treatment, "treatment", 2)
    return _native.pvalue_proportions(_whole(cn, "control n"), _whole(cx, "control conversions"),
                                      _whole(tn, "treatment n"), _whole(tx, "treatment conversions"), method,
                                      alternative, _number(confidence, "confidence"), bool(anytime),
                                      None if mixture_sd is None else _number(mixture_sd, "mixture_sd"))


def pvalue_means(*, control: Sequence[float], treatment: Sequence[float], pooled_variance: bool = False,
                 alternative: str = "two-sided", confidence: float = 0.95, anytime: bool = False,
                 mixture_sd: Optional[float] = None) -> dict:
    """The p-value of an experiment on a numeric metric: each arm ``(n, mean, sd)``; Welch's t-test by default."""
    cn, cm, cs = _arm(control, "control", 3)
    tn, tm, ts = _arm(treatment, "treatment", 3)
    return _native.pvalue_means(_whole(cn, "control n"), _number(cm, "control mean"), _number(cs, "control sd"),
                                _whole(tn, "treatment n"), _number(tm, "treatment mean"),
                                _number(ts, "treatment sd"), bool(pooled_variance), alternative,
                                _number(confidence, "confidence"), bool(anytime),
                                None if mixture_sd is None else _number(mixture_sd, "mixture_sd"))


def _optional_whole(value: Any, field: str) -> Optional[int]:
    return None if value is None else _whole(value, field)


def plan_proportions(*, baseline: float, min_effect: Optional[float] = None, level: float = 0.05,
                     power: Optional[float] = None, n_per_arm: Optional[int] = None,
                     alternative: str = "two-sided") -> dict:
    """Plans a conversion experiment: the users per arm for ``min_effect`` at ``power`` (default 0.8),
    the power of ``n_per_arm`` users, or the smallest effect ``n_per_arm`` users detect.
    """
    return _native.plan_proportions(_number(baseline, "baseline"), _number(level, "level"), alternative,
                                    None if min_effect is None else _number(min_effect, "min_effect"),
                                    None if power is None else _number(power, "power"),
                                    _optional_whole(n_per_arm, "n_per_arm"))


def plan_means(*, sd: float, min_effect: Optional[float] = None, level: float = 0.05,
               power: Optional[float] = None, n_per_arm: Optional[int] = None,
               alternative: str = "two-sided") -> dict:
    """Plans an experiment on a numeric metric with standard deviation ``sd`` (as :func:`plan_proportions`)."""
    return _native.plan_means(_number(sd, "sd"), _number(level, "level"), alternative,
                              None if min_effect is None else _number(min_effect, "min_effect"),
                              None if power is None else _number(power, "power"),
                              _optional_whole(n_per_arm, "n_per_arm"))
