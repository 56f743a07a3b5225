"""Computations behind the evidence panel: plain functions of the FitService, cached.

Every function takes the service, the dataset id, the columns and the rows the analyst left
out (file line numbers), and calls the engine's evidence functions (``fitting.degree_evidence``,
``evidence_sentence``, ``mandel_test``, ``influence``, ``verdict_stability``) on the rows in use.
The verdict is always the engine's one rule (``fitting.verdict_sweep``): the service's cached
verdict sweep when no row is left out, the same rule on the remaining rows otherwise.

Rows left out
-------------
``exclude_lines(sel, lines)`` is the one place that leaves rows out of a ``Selection`` by their
file line numbers, with the reason "left out by the analyst" in ``Selection.dropped``. The input
file is never changed. The exclusions live in the page's store as
``{"dataset": id, "rows": [{"line": 12, "reason": "..."}]}``; they apply only to that dataset.
"""

from __future__ import annotations

import dataclasses
import json
import threading
import weakref
from collections import OrderedDict
from dataclasses import dataclass
from typing import TYPE_CHECKING, Callable

import numpy as np

import fitting
from fitting import DegreeSweep, FitError, Selection

from . import text

if TYPE_CHECKING:
    from .service import Columns, FitService

STABILITY_DRAWS = 200
MAX_EXCLUDED = 100  # rows one analyst may leave out of one dataset on the page
REASON_CHARS = 200
URL_CHARS = 8_000  # the longest "out" URL value that is read
ROWS_ABOVE = 3  # the evidence table shows degrees up to the recommended (or shown) degree plus this many
MIN_ROWS = 3


# ----------------------------------------------------------------------------
# exclusions: the store record, the URL value and the selection


@dataclass(frozen=True)
class Exclusion:
    """One row left out on purpose: its file line number and the analyst's reason."""

    line: int
    reason: str


def clean_reason(reason) -> str:
    """The reason as one line of at most REASON_CHARS characters (control characters become spaces)."""
    s = "" if reason is None else str(reason)
    s = "".join(" " if ord(c) < 32 or ord(c) == 127 else c for c in s)
    return " ".join(s.split())[:REASON_CHARS]


def _line_of(value) -> int | None:
    if isinstance(value, bool):
        return None
    try:
        v = float(value)
    except (TypeError, ValueError, OverflowError):
        return None
    return int(v) if v == v and abs(v) < 2**53 and v == int(v) and v >= 1 else None


def exclusions_of(store, dataset: str | None) -> tuple[Exclusion, ...]:
    """The exclusions in the page's store for ``dataset`` (none for another dataset), by line."""
    if not isinstance(store, dict) or not dataset or store.get("dataset") != dataset:
        return ()
    rows = store.get("rows")
    out: dict[int, Exclusion] = {}
    for r in rows if isinstance(rows, list) else []:
        line = _line_of(r.get("line")) if isinstance(r, dict) else None
        if line is not None and line not in out and len(out) < MAX_EXCLUDED:
            out[line] = Exclusion(line, clean_reason(r.get("reason")))
    return tuple(out[k] for k in sorted(out))


def to_store(dataset: str, exclusions) -> dict:
    """The store record of these exclusions."""
    return {"dataset": dataset, "rows": [{"line": e.line, "reason": e.reason} for e in exclusions]}


def url_value(exclusions) -> str | None:
    """The URL's ``out`` value that restores these exclusions (None when there are none)."""
    if not exclusions:
        return None
    return json.dumps([[e.line, e.reason] for e in exclusions], ensure_ascii=False, separators=(",", ":"))


def from_url_value(value) -> tuple[Exclusion, ...]:
    """Exclusions from the URL's ``out`` value; anything malformed is ignored."""
    if not isinstance(value, str) or not value or len(value) > URL_CHARS:
        return ()
    try:
        items = json.loads(value)
    except (ValueError, RecursionError):
        return ()
    rows = [
        {"line": i[0], "reason": i[1] if len(i) > 1 else ""}
        for i in (items if isinstance(items, list) else [])
        if isinstance(i, list) and i
    ]
    return exclusions_of({"dataset": "url", "rows": rows}, "url")


def exclude_lines(sel: Selection, lines) -> Selection:
    """``sel`` without the rows on these file lines (lines it does not hold are ignored)."""
    lines = sorted({int(v) for v in lines})
    if not lines or sel.line_numbers is None:
        return sel
    drop = np.isin(sel.line_numbers, np.asarray(lines, dtype=np.int64))
    if not drop.any():
        return sel
    keep = ~drop
    dropped = dict(sel.dropped)
    dropped[text.LEFT_OUT_REASON] = fitting.DropInfo.of(sel.line_numbers[drop])
    return dataclasses.replace(
        sel,
        x=np.ascontiguousarray(sel.x[keep]),
        y=np.ascontiguousarray(sel.y[keep]),
        weights=None if sel.weights is None else np.ascontiguousarray(sel.weights[keep]),
        group=None if sel.group is None else sel.group[keep],
        rows_used=int(keep.sum()),
        rows_dropped=int(sel.rows_dropped + drop.sum()),
        dropped=dropped,
        line_numbers=sel.line_numbers[keep],
    )


# ----------------------------------------------------------------------------
# a cache per service


class _Cache:
    """A small least-recently-used cache, thread-safe; a value being computed is waited for, not computed again
    (verdict stability takes seconds of both cores: two pages asking at once must not double that)."""

    def __init__(self, size: int = 32):
        self.size = size
        self._d: OrderedDict = OrderedDict()
        self._lock = threading.Lock()
        self._pending: dict = {}

    def _hit(self, key):
        with self._lock:
            if key in self._d:
                self._d.move_to_end(key)
                return True, self._d[key]
            return False, self._pending.setdefault(key, threading.Lock())

    def get(self, key, make: Callable[[], object]):
        found, value = self._hit(key)
        if found:
            return value
        with value:  # the key's own lock: one computation at a time
            found, again = self._hit(key)
            if found:
                return again
            try:
                result = make()
            finally:
                with self._lock:
                    self._pending.pop(key, None)
            with self._lock:
                self._d[key] = result
                while len(self._d) > self.size:
                    self._d.popitem(last=False)
        return result


_CACHES: weakref.WeakKeyDictionary = weakref.WeakKeyDictionary()
_CACHES_LOCK = threading.Lock()


def _cache(service: FitService) -> _Cache:
    with _CACHES_LOCK:
        if service not in _CACHES:
            _CACHES[service] = _Cache(64)
        return _CACHES[service]


def _cached(service: FitService, key: tuple, make: Callable[[], object]):
    service.store.get(key[1])  # owner and eviction check before any cached view of this dataset
    return _cache(service).get(key, make)


# ----------------------------------------------------------------------------
# the rows in use and the verdict on them


def _carries_exclusions(cols: Columns) -> bool:
    """True once ``Columns`` has the ``excluded`` field (the service then leaves the rows out itself)."""
    return any(f.name == "excluded" for f in dataclasses.fields(cols))


def base_columns(cols: Columns) -> Columns:
    """``cols`` with no row left out."""
    return dataclasses.replace(cols, excluded=()) if _carries_exclusions(cols) else cols


def selection(service: FitService, ds: str, cols: Columns, excluded: tuple[int, ...] = ()) -> Selection:
    """The rows in use: the service's selection without the rows left out; FitError below MIN_ROWS."""
    cols = base_columns(cols)

    def make():
        sel = exclude_lines(service.selection(ds, cols), excluded)
        if sel.rows_used < MIN_ROWS:
            raise FitError(text.too_few_left(sel.rows_used, MIN_ROWS))
        return sel

    return _cached(service, ("selection", ds, cols, tuple(excluded)), make) if excluded else make()


def verdict(service: FitService, ds: str, cols: Columns, excluded: tuple[int, ...] = ()) -> DegreeSweep:
    """The verdict sweep (the engine's one rule) on the rows in use (the service's own when it leaves rows out)."""
    cols = base_columns(cols)
    if not excluded:
        return service.steady_sweep(ds, cols)
    if _carries_exclusions(cols):
        return service.steady_sweep(ds, dataclasses.replace(cols, excluded=tuple(excluded)))

    def make():
        sel = selection(service, ds, cols, excluded)
        return fitting.verdict_sweep(sel.x, sel.y, weights=sel.weights, groups=sel.group)

    return _cached(service, ("verdict", ds, cols, tuple(excluded)), make)


@dataclass(frozen=True, eq=False)
class EvidenceView:
    """The evidence table's numbers, the verdict they stand beside and the sentences' inputs."""

    evidence: fitting.DegreeEvidence
    verdict: DegreeSweep
    recommended: int
    sentence: str
    rule: str
    rows_used: int
    left_out: int
    levels_held_out: bool  # the verdict's folds hold out whole x levels
    mandel: fitting.MandelResult | None
    mandel_problem: str | None

    def shown_degrees(self, degree: int | None) -> list[int]:
        """Degrees in the table: 0 up to the recommended or shown degree plus ROWS_ABOVE."""
        top = max(self.recommended, degree if degree is not None else 0) + ROWS_ABOVE
        return [int(d) for d in self.evidence.degrees if d <= top]

    def cv_rmse(self, degree: int) -> tuple[float, float]:
        """The verdict's mean test RMSE and its standard error at ``degree`` (NaN where it has none)."""
        degs = list(int(d) for d in self.verdict.degrees)
        if degree not in degs:
            return float("nan"), float("nan")
        i = degs.index(degree)
        return float(self.verdict.test_rmse[i]), float(self.verdict.test_rmse_se[i])


def _mandel(sel: Selection) -> tuple[fitting.MandelResult | None, str | None]:
    try:
        return fitting.mandel_test(sel.x, sel.y, weights=sel.weights), None
    except FitError as exc:
        return None, str(exc)


def evidence_view(service: FitService, ds: str, cols: Columns, excluded: tuple[int, ...] = ()) -> EvidenceView:
    """Lack of fit, added-term tests, AIC and BIC per degree, the verdict and Mandel's test (cached)."""
    cols = base_columns(cols)

    def make():
        sel = selection(service, ds, cols, excluded)
        sweep = verdict(service, ds, cols, excluded)
        ev = fitting.degree_evidence(sel.x, sel.y, weights=sel.weights)
        rec = int(sweep.recommended_degree)
        rec_in_table = min(rec, int(ev.degrees[-1]))
        mandel, problem = _mandel(sel)
        return EvidenceView(
            evidence=ev,
            verdict=sweep,
            recommended=rec,
            sentence=fitting.evidence_sentence(ev, rec_in_table),
            rule=sweep.verdict_rule or sweep.scheme,
            rows_used=int(sel.rows_used),
            left_out=len(excluded),
            levels_held_out=cols.group is None and ev.replicates > 0,
            mandel=mandel,
            mandel_problem=problem,
        )

    return _cached(service, ("evidence", ds, cols, tuple(excluded)), make)


def stability(service: FitService, ds: str, cols: Columns, excluded: tuple[int, ...] = ()):
    """How often the verdict comes out the same over STABILITY_DRAWS redraws of the folds (cached; seconds)."""
    cols = base_columns(cols)

    def make():
        sel = selection(service, ds, cols, excluded)
        return fitting.verdict_stability(
            sel.x, sel.y, draws=STABILITY_DRAWS, weights=sel.weights, groups=sel.group, seed=0
        )

    return _cached(service, ("stability", ds, cols, tuple(excluded)), make)


def influence(service: FitService, ds: str, cols: Columns, degree: int, excluded: tuple[int, ...] = ()):
    """Influence of every row in use on the degree-``degree`` fit of all of them (cached)."""
    cols = base_columns(cols)

    def make():
        sel = selection(service, ds, cols, excluded)
        return fitting.influence(sel.x, sel.y, int(degree), weights=sel.weights, lines=sel.line_numbers)

    return _cached(service, ("influence", ds, cols, int(degree), tuple(excluded)), make)


@dataclass(frozen=True)
class FlaggedRow:
    """A flagged row of the influence table, with the residual the residual chart draws for it."""

    line: int
    x: float
    y: float
    leverage: float
    studentized: float
    cooks: float
    flags: tuple[str, ...]
    verdict: str


def flagged_rows(inf) -> list[FlaggedRow]:
    """The rows of an ``Influence`` whose verdict is not "ok", in file order."""
    out = []
    for i in range(inf.n):
        if inf.verdicts[i] == "ok":
            continue
        out.append(
            FlaggedRow(
                line=int(inf.lines[i]),
                x=float(inf.x[i]),
                y=float(inf.y[i]),
                leverage=float(inf.leverage[i]),
                studentized=float(inf.studentized_residual[i]),
                cooks=float(inf.cooks_distance[i]),
                flags=tuple(inf.flags[i]),
                verdict=str(inf.verdicts[i]),
            )
        )
    return out


def line_at(service: FitService, ds: str, cols: Columns, x: float, y: float) -> int | None:
    """The file line of the row at (x, y) among the columns' usable rows (the first when several), or None."""
    sel = service.selection(ds, base_columns(cols))
    if sel.line_numbers is None:
        return None
    hit = np.nonzero((sel.x == float(x)) & (sel.y == float(y)))[0]
    return int(sel.line_numbers[hit[0]]) if hit.size else None


def check_line(service: FitService, ds: str, cols: Columns, line, excluded: tuple[int, ...]) -> int:
    """A typed line number checked against the rows in use; FitError with the reason when it cannot be left out."""
    n = _line_of(str(line).strip()) if line is not None and str(line).strip() else None
    if n is None:
        raise FitError(text.not_a_line(line))
    if n in excluded:
        raise FitError(text.already_left_out(n))
    sel = service.selection(ds, base_columns(cols))
    if sel.line_numbers is None or n not in set(int(v) for v in sel.line_numbers):
        raise FitError(text.not_a_row(n))
    if len(excluded) >= MAX_EXCLUDED:
        raise FitError(text.too_many_left_out(MAX_EXCLUDED))
    if sel.rows_used - len(excluded) - 1 < MIN_ROWS:
        raise FitError(text.too_few_left(sel.rows_used - len(excluded) - 1, MIN_ROWS))
    return n
