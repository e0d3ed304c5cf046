# Type stubs for editors and type checkers (docs/python.md describes every function).
import os
from typing import Any, Literal, Optional, Sequence, Union, overload

__version__: str

class Error(Exception):
    code: str

class InvalidInput(Error): ...
class Refused(Error): ...
class StorageError(Error): ...

class Outcome:
    @property
    def step(self) -> int: ...
    @property
    def level(self) -> float: ...
    @property
    def rejected(self) -> bool: ...
    @property
    def wealth(self) -> float: ...

class Reservation:
    @property
    def launch(self) -> int: ...
    @property
    def level(self) -> float: ...
    @property
    def wealth(self) -> float: ...

class RunningTest:
    @property
    def launch(self) -> int: ...
    @property
    def level(self) -> float: ...

_Log = Union[Any, Sequence[dict], str, os.PathLike]
_Rules = Union[str, Sequence[str]]

def format_number(value: float) -> str: ...

class Rule:
    def __init__(
        self,
        name: str,
        alpha: float = 0.05,
        *,
        initial_wealth: Optional[float] = ...,
        candidate_threshold: Optional[float] = ...,
        discard_threshold: Optional[float] = ...,
        payout: Optional[float] = ...,
        spending: Optional[str] = ...,
        evaluation: Optional[Literal["exact", "fast"]] = ...,
    ) -> None: ...
    @property
    def name(self) -> str: ...
    @property
    def configuration(self) -> str: ...
    @property
    def tests(self) -> int: ...
    @property
    def rejections(self) -> int: ...
    @property
    def wealth(self) -> float: ...
    def next_level(self) -> float: ...
    def record(self, p_value: float) -> Outcome: ...
    def record_e(self, e_value: float) -> Outcome: ...
    def launch(self) -> Reservation: ...
    def finish(self, launch: Union[int, Reservation], p_value: float) -> Outcome: ...
    def abandon(self, launch: Union[int, Reservation]) -> None: ...
    def running(self) -> list[RunningTest]: ...
    @property
    def reserved(self) -> float: ...
    def explain(self) -> dict[str, Any]: ...

def explain(rule: Rule) -> dict[str, Any]: ...
def replay(
    log: _Log,
    rules: _Rules = ...,
    alpha: Optional[float] = ...,
    *,
    format: Optional[Literal["csv", "jsonl"]] = ...,
    alternative: Optional[Literal["two-sided", "greater", "less"]] = ...,
    report: Optional[Union[str, os.PathLike]] = ...,
    as_frame: Optional[bool] = ...,
    **params: Any,
) -> Any: ...
def replay_csv(
    log: _Log,
    rules: _Rules = ...,
    alpha: Optional[float] = ...,
    *,
    format: Optional[Literal["csv", "jsonl"]] = ...,
    alternative: Optional[Literal["two-sided", "greater", "less"]] = ...,
    report: Optional[Union[str, os.PathLike]] = ...,
    **params: Any,
) -> str: ...
def simulate(
    rules: _Rules = ...,
    *,
    tests: int = ...,
    runs: int = ...,
    nonnull_fraction: float = ...,
    seed: int = ...,
    threads: Optional[int] = ...,
    effect: float = ...,
    effect_sd: float = ...,
    null_mean: float = ...,
    pattern: str = ...,
    correlation: str = ...,
    mean_duration: float = ...,
    peeking: int = ...,
    mixture_sd: Optional[float] = ...,
    alpha: Optional[float] = ...,
    report: Optional[Union[str, os.PathLike]] = ...,
    as_frame: Optional[bool] = ...,
    **params: Any,
) -> Any: ...
def simulate_csv(
    rules: _Rules = ...,
    *,
    tests: int = ...,
    runs: int = ...,
    nonnull_fraction: float = ...,
    seed: int = ...,
    threads: Optional[int] = ...,
    effect: float = ...,
    effect_sd: float = ...,
    null_mean: float = ...,
    pattern: str = ...,
    correlation: str = ...,
    mean_duration: float = ...,
    peeking: int = ...,
    mixture_sd: Optional[float] = ...,
    alpha: Optional[float] = ...,
    **params: Any,
) -> str: ...

class Ledger:
    def __init__(self, path: Union[str, os.PathLike]) -> None: ...
    def __enter__(self) -> Ledger: ...
    def __exit__(self, *exc: Any) -> None: ...
    def close(self) -> None: ...
    @property
    def path(self) -> str: ...
    def create_stream(self, name: str, rule: str = ..., alpha: Optional[float] = ..., **params: Any) -> dict[str, Any]: ...
    def decide(
        self, stream: str, *, id: str, p_value: Optional[float] = ..., e_value: Optional[float] = ...
    ) -> dict[str, Any]: ...
    def history(self, stream: str, *, as_frame: Optional[bool] = ...) -> Any: ...
    def status(self, stream: str) -> dict[str, Any]: ...
    def streams(self) -> list[dict[str, Any]]: ...
    def next_level(self, stream: str) -> float: ...
    def verify(self, stream: str, anchors: Sequence[str] = ...) -> dict[str, Any]: ...
    def close_stream(self, stream: str) -> dict[str, Any]: ...
    def launch(self, stream: str, *, id: str) -> dict[str, Any]: ...
    def abandon(self, stream: str, *, id: str) -> dict[str, Any]: ...
    def running(self, stream: str, *, as_frame: Optional[bool] = ...) -> Any: ...
    def explain(self, stream: str, id: Optional[str] = ...) -> dict[str, Any]: ...
    def look(
        self,
        stream: str,
        *,
        id: str,
        control: Sequence[float],
        treatment: Sequence[float],
        mixture_sd: Optional[float] = ...,
    ) -> dict[str, Any]: ...
    def looks(self, stream: str, *, id: str, as_frame: Optional[bool] = ...) -> Any: ...
    def report(self, stream: str, path: Union[str, os.PathLike]) -> dict[str, Any]: ...

def pvalue_proportions(
    *,
    control: Sequence[int],
    treatment: Sequence[int],
    method: Literal["pooled", "unpooled", "fisher"] = ...,
    alternative: Literal["two-sided", "greater", "less"] = ...,
    confidence: float = ...,
    anytime: bool = ...,
    mixture_sd: Optional[float] = ...,
) -> dict[str, Any]: ...
def pvalue_means(
    *,
    control: Sequence[float],
    treatment: Sequence[float],
    pooled_variance: bool = ...,
    alternative: Literal["two-sided", "greater", "less"] = ...,
    confidence: float = ...,
    anytime: bool = ...,
    mixture_sd: Optional[float] = ...,
) -> dict[str, Any]: ...
def plan_proportions(
    *,
    baseline: float,
    min_effect: Optional[float] = ...,
    level: float = ...,
    power: Optional[float] = ...,
    n_per_arm: Optional[int] = ...,
    alternative: Literal["two-sided", "greater", "less"] = ...,
) -> dict[str, Any]: ...
def plan_means(
    *,
    sd: float,
    min_effect: Optional[float] = ...,
    level: float = ...,
    power: Optional[float] = ...,
    n_per_arm: Optional[int] = ...,
    alternative: Literal["two-sided", "greater", "less"] = ...,
) -> dict[str, Any]: ...
