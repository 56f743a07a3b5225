"""The fitting service: every computation the dashboard needs, cached, returning plain views.

Callbacks stay thin: they call one method here and hand the view to a figure
builder. Nothing in this module knows about dash components.

Costs and caches (per dataset id):

* ``split_view``  — the user's chosen split: one sweep over all degrees (about one
  fit) plus the steady sweep the verdict rests on, and a point sample for the chart.
  Cached per (dataset, columns, split).
* ``degree_view`` — curve and bands of the display fit at one degree on a few hundred
  x values: no pass over the rows. This is what a slider move costs.
* ``model_view``  — the precise fit (``fitting.fit_polynomial``) for the coefficient
  table, residuals and exports. Cached per (dataset, columns, split, degree); it is
  computed in its own callback, off the chart's critical path.

The verdict
-----------
A single holdout of a small dataset is a noisy judge of degree. The recommendation
and the overfitting warning therefore always come from the engine's one rule,
``fitting.verdict_sweep`` (10-fold cross-validation, repeated 5 times up to 5,000 rows;
one group held out at a time with a group column; whole x levels held out when x has
replicates), whatever split the charts show. ``degreescope sweep`` calls the same rule.
"""

from __future__ import annotations

import base64
import binascii
import math
import re
import threading
from collections import OrderedDict
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Callable, NamedTuple

import numpy as np

import fitting
from fitting import MAX_DEGREE, MAX_SEED, DegreeSweep, FitError, PolynomialFit, Selection, Table

from . import text
from .handover import file_sha256
from .store import DatasetGone, DatasetStore, StoredDataset
from .views_evidence import exclude_lines

__all__ = [
    "Columns",
    "SplitSettings",
    "Refusal",
    "FitService",
    "DatasetInfo",
    "SplitView",
    "Density",
    "DegreeView",
    "ModelView",
    "PredictionView",
    "SAMPLE_PATH",
    "PASTED_NAME",
    "DIGEST_CHARS",
    "MAX_PREDICT_VALUES",
    "MAX_PREDICT_CHARS",
    "check_weighting_choice",
    "clamp_degree",
    "decode_upload",
    "parse_x_values",
]

SAMPLE_PATH = Path(__file__).resolve().parent.parent / "sample_data" / "sensor_calibration.csv"
MAX_POINTS = 20_000  # points drawn on the chart; fits always use every row
DENSITY_FROM = 3_000  # rows above which the charts draw a density (counts in bins) instead of markers
DENSITY_BINS = (120, 80)  # bins across x and y
Y_PAD = 0.12  # share of the y range of the rows added above and below on the fit chart
GRID_POINTS = 400
PAD = 0.06  # share of the x range drawn beyond the data on each side
MAX_PREDICT_VALUES = 1_000
MAX_PREDICT_CHARS = 40 * MAX_PREDICT_VALUES  # checked before the text is split
HOLDOUT_RANGE = (10, 50)  # per cent
FOLDS_RANGE = (2, 50)
SPLIT_MODES = ("holdout", "ordered", "kfold")
DIGEST_CHARS = 12  # hex digits of a file's SHA-256 that name its content in a shared URL
PASTED_NAME = "pasted table"


# ----------------------------------------------------------------------------
# settings


@dataclass(frozen=True)
class Columns:
    """The columns a fit uses: x, y and the optional weights and group columns, and the page's weighting.

    ``weighting`` is a named rule (``fitting.WEIGHTINGS``: "none", "1/x", "1/x2", "1/y", "1/y2"):
    under a rule other than "none" the selection's weights are the rule's, and a weights column
    is refused as well.
    """

    x: str
    y: str
    weights: str | None = None
    group: str | None = None
    excluded: tuple[int, ...] = ()  # file lines the analyst left out (app/views_evidence.py)
    weighting: str = "none"


class Refusal(NamedTuple):
    """A split setting the page refused: the setting, what was typed, what is used instead, the rule."""

    setting: str
    typed: object
    used: object
    rule: str


def _finite_number(value) -> float | None:
    """``value`` as a finite float, or None for non-numbers, NaN and infinities."""
    if isinstance(value, bool):
        return None
    try:
        v = float(value)
    except (TypeError, ValueError, OverflowError):
        return None
    return v if math.isfinite(v) else None


def _whole_in(value, lo: int, hi: int) -> int | None:
    v = _finite_number(value)
    return int(v) if v is not None and v == int(v) and lo <= v <= hi else None


@dataclass(frozen=True)
class SplitSettings:
    """How the charts split the rows. ``mode``: "holdout", "ordered" or "kfold"."""

    mode: str = "holdout"
    holdout: float = 0.25
    folds: int = 10
    seed: int = 0

    @staticmethod
    def parse(mode, holdout, folds, seed) -> SplitSettings:
        """Strict: FitError names the first setting out of range (holdout in per cent or as a fraction)."""
        settings, refused = SplitSettings.coerce(mode, holdout, folds, seed)
        if refused:
            r = refused[0]
            if r.setting == "holdout":
                raise FitError(f"The holdout share must be between 10 % and 50 %, not {text.echo(r.typed)} %.")
            if r.setting == "folds":
                raise FitError(f"Use between 2 and 50 folds, not {text.echo(r.typed)}; 5 or 10 are common.")
            raise FitError(f"The seed must be a whole number from 0 to {MAX_SEED}, not {text.echo(r.typed)}.")
        return settings

    @staticmethod
    def coerce(mode, holdout, folds, seed) -> tuple[SplitSettings, tuple[Refusal, ...]]:
        """Settings from the page, each refused value replaced by the nearest allowed one, and the refusals."""
        refused = []
        frac = _finite_number(holdout)
        if frac is not None and frac > 1:  # the page gives per cent
            frac /= 100.0
        if frac is None or not (0.10 - 1e-9 <= frac <= 0.50 + 1e-9):
            frac = min(0.5, max(0.1, frac)) if frac is not None else 0.25
            refused.append(Refusal("holdout", holdout, round(frac * 100), "10 to 50 per cent"))
        k = _whole_in(folds, *FOLDS_RANGE)
        if k is None:
            v = _finite_number(folds)
            k = 10 if v is None else int(min(FOLDS_RANGE[1], max(FOLDS_RANGE[0], v)))
            refused.append(Refusal("folds", folds, k, "use 2 to 50 folds"))
        s = _whole_in(seed, 0, MAX_SEED)
        if s is None:
            v = _finite_number(seed)
            s = 0 if v is None else int(min(MAX_SEED, max(0, v)))
            refused.append(Refusal("seed", seed, s, f"a whole number from 0 to {MAX_SEED}"))
        mode = mode if mode in SPLIT_MODES else "holdout"
        return SplitSettings(mode=mode, holdout=round(frac, 4), folds=k, seed=s), tuple(refused)


# ----------------------------------------------------------------------------
# views (numbers for figure builders, tables and exports; the words are in app/text.py)


@dataclass(frozen=True)
class DatasetInfo:
    """What the page knows of a stored dataset (the data stay on the server)."""

    id: str
    name: str
    columns: tuple[str, ...]
    numeric_columns: tuple[str, ...]
    default_x: str
    default_y: str
    report_lines: tuple[str, ...]
    units: dict[str, str]
    rows: int
    decimal: str = "."
    digest: str = ""  # the first DIGEST_CHARS hex digits of the file's SHA-256
    sheet: str | None = None  # the sheet read from a workbook
    sheet_names: tuple[str, ...] = ()
    choice_note: str | None = None  # why the default columns were chosen (a counter passed over)
    head_lines: tuple[str, ...] = ()  # the report's first lines: how the file was read, its columns
    notes: tuple[str, ...] = ()  # the report's notes (dates, formulas, ...), without the rows left out

    def to_store(self) -> dict:
        """The record held in the page's ``dcc.Store``: ids, names and the file's decimal mark, no data."""
        return {
            "id": self.id,
            "name": self.name,
            "columns": list(self.columns),
            "numeric": list(self.numeric_columns),
            "x": self.default_x,
            "y": self.default_y,
            "decimal": self.decimal,
            "sha": self.digest,
            "sheet": self.sheet,
            "sheets": list(self.sheet_names),
        }


@dataclass(frozen=True, eq=False)
class Density:
    """Rows counted in DENSITY_BINS bins over the fit chart's ranges: training and test apart."""

    x: np.ndarray  # bin centres along x
    y: np.ndarray  # bin centres along y
    train: np.ndarray  # counts, shape (len(y), len(x))
    test: np.ndarray
    x_step: float
    y_step: float

    @staticmethod
    def of(x: np.ndarray, y: np.ndarray, test: np.ndarray, x_range, y_range, bins=DENSITY_BINS) -> Density:
        """The counts of the training rows (``~test``) and of the test rows of (x, y)."""
        rng = [list(x_range), list(y_range)]
        train_c, xe, ye = np.histogram2d(x[~test], y[~test], bins=bins, range=rng)
        test_c, _, _ = np.histogram2d(x[test], y[test], bins=bins, range=rng)
        return Density(
            x=(xe[:-1] + xe[1:]) / 2,
            y=(ye[:-1] + ye[1:]) / 2,
            train=train_c.T,
            test=test_c.T,
            x_step=float(xe[1] - xe[0]),
            y_step=float(ye[1] - ye[0]),
        )


@dataclass(frozen=True, eq=False)
class SplitView:
    """The chosen split's sweep, the verdict sweep and the points on the chart."""

    columns: Columns
    split: SplitSettings
    x_name: str
    y_name: str
    x_unit: str | None
    y_unit: str | None
    rows_used: int
    rows_dropped: int
    # points for the chart (a sample when there are many rows)
    train_x: np.ndarray
    train_y: np.ndarray
    test_x: np.ndarray
    test_y: np.ndarray
    points_shown: int
    sampled: bool
    has_test_points: bool
    # x ranges
    data_range: tuple[float, float]
    training_range: tuple[float, float]
    grid: np.ndarray
    # sweeps
    sweep: DegreeSweep  # the chosen split's sweep
    steady: DegreeSweep  # the verdict sweep the recommendation rests on
    max_degree: int
    y_range: tuple[float, float] = (0.0, 1.0)  # the fit chart's y axis: every row's y, padded
    density: Density | None = None  # every row in bins, when more than DENSITY_FROM rows

    @property
    def dense(self) -> bool:
        """True when the charts draw a density instead of markers."""
        return self.density is not None

    @property
    def recommended_degree(self) -> int:
        """The verdict sweep's recommended degree."""
        return int(self.steady.recommended_degree)

    @property
    def x_label(self) -> str:
        """The x axis title: name and unit."""
        return text.axis_label(self.x_name, self.x_unit)

    @property
    def y_label(self) -> str:
        """The y axis title: name and unit."""
        return text.axis_label(self.y_name, self.y_unit)

    @property
    def split_label(self) -> str:
        """The chosen split as the engine's sweep names it (its ``scheme``)."""
        return self.sweep.scheme

    @property
    def steady_label(self) -> str:
        """What the recommendation rests on: the engine's rule sentence, naming the group column if any."""
        if self.columns.group is not None or not self.steady.verdict_rule:
            return text.verdict_label(self.steady.scheme, self.columns.group, self.steady.n_splits)
        return self.steady.verdict_rule

    def verdict_test_rmse(self, degree: int) -> float:
        """The verdict sweep's test RMSE at ``degree`` (NaN when it failed there)."""
        return float(self.steady.test_rmse[self.steady.index(degree)])


@dataclass(frozen=True, eq=False)
class DegreeView:
    """The display fit at one degree: curve and bands on the view's grid, and the sweep's numbers there."""

    degree: int
    curve: np.ndarray
    conf_lo: np.ndarray
    conf_hi: np.ndarray
    pred_lo: np.ndarray
    pred_hi: np.ndarray
    train_rmse: float
    test_rmse: float
    test_rmse_se: float  # NaN for a single holdout
    train_r2: float
    test_r2: float
    warnings: tuple[str, ...]


@dataclass(frozen=True, eq=False)
class ModelView:
    """The precise fit at one degree, its t quantile, the residuals of the chart's points and the test numbers."""

    fit: PolynomialFit
    t_quantile: float
    residual_x: np.ndarray
    residuals: np.ndarray
    residual_sampled: bool
    every_row: bool  # False: the fit used the training rows of a holdout
    split_label: str
    x_unit: str | None
    y_unit: str | None
    test_rmse: float
    test_rmse_se: float
    test_r2: float
    level: float = 0.95  # the coefficients' interval level, a fraction (``t_quantile`` is its quantile)

    @property
    def equation(self) -> str:
        """The fit in the power basis, original units, 8 significant digits."""
        return self.fit.equation(digits=8, x="x", y="y")

    @property
    def coefficient_rows(self) -> list[dict]:
        """One dict per power: term, power, coefficient, se, ci_lo, ci_hi (Student's t at ``level``) and unit."""
        q = self.t_quantile
        rows = []
        for k, (c, se) in enumerate(zip(self.fit.coefficients, self.fit.standard_errors, strict=True)):
            half = q * se if np.isfinite(q) else float("nan")
            rows.append(
                {
                    "term": text.term_name(k),
                    "power": k,
                    "coefficient": float(c),
                    "se": float(se),
                    "ci_lo": float(c - half),
                    "ci_hi": float(c + half),
                    "unit": text.coefficient_unit(self.x_unit, self.y_unit, k),
                }
            )
        return rows

    @property
    def fitted_on(self) -> str:
        """Which rows the fit used, in words (read by app/exports.py; the sentence lives in app/text.py)."""
        return text.fitted_on(self)

    @property
    def fitted_rows(self) -> str:
        """The rows the fit used, short (the words live in app/text.py)."""
        return text.fitted_rows(self)


@dataclass(frozen=True, eq=False)
class PredictionView:
    """Predictions and bands at typed (or data) x values, and which lie outside the fitted range."""

    x: np.ndarray
    y: np.ndarray
    conf_lo: np.ndarray
    conf_hi: np.ndarray
    pred_lo: np.ndarray
    pred_hi: np.ndarray
    outside: np.ndarray
    domain: tuple[float, float]
    level: float = 0.95  # the bands' level, a fraction


# ----------------------------------------------------------------------------
# a small thread-safe LRU


class _LRU:
    def __init__(self, maxsize: int):
        self.maxsize = maxsize
        self._d: OrderedDict = OrderedDict()
        self._lock = threading.Lock()
        self.misses = 0

    def get_or_make(self, key, make: Callable[[], object]):
        with self._lock:
            if key in self._d:
                self._d.move_to_end(key)
                return self._d[key]
            self.misses += 1
        value = make()  # outside the lock: another thread may compute the same; harmless
        with self._lock:
            self._d[key] = value
            self._d.move_to_end(key)
            while len(self._d) > self.maxsize:
                self._d.popitem(last=False)
        return value


# ----------------------------------------------------------------------------
# intake and typed values


def decode_upload(contents: str, limit: int) -> bytes:
    """Bytes of a ``dcc.Upload`` data URL; FileTooLargeError above ``limit`` bytes (checked before decoding)."""
    if not isinstance(contents, str) or "," not in contents:
        raise fitting.IntakeError("The upload arrived incomplete; please try again.")
    b64 = contents.split(",", 1)[1]
    estimate = (len(b64) * 3) // 4 - b64[-2:].count("=")
    if estimate > limit:
        raise fitting.FileTooLargeError(_too_large(estimate, limit))
    try:
        data = base64.b64decode(b64, validate=False)
    except (binascii.Error, ValueError):
        raise fitting.IntakeError("The upload could not be decoded; please try again.") from None
    if len(data) > limit:
        raise fitting.FileTooLargeError(_too_large(len(data), limit))
    return data


def _too_large(size: int, limit: int) -> str:
    def mb(v):
        return f"{v / 2**20:.1f} MiB" if v >= 2**20 else f"{v / 1024:.0f} KiB" if v >= 1024 else f"{v} bytes"

    return (
        f"The file is {mb(size)}, over this server's upload limit of {mb(limit)}; "
        "use a smaller file or ask for a higher limit."
    )


def _what_is_wanted(token: str) -> str:
    try:
        float(token)
    except ValueError:
        return "a number"
    return "a finite number"


def parse_x_values(text_in: str | None, decimal: str = ".") -> np.ndarray:
    """x values typed by the user.

    With the decimal point, commas, semicolons, spaces and new lines separate values. With the
    decimal comma (``decimal=","``, a file written that way), "250,5" is one value and only
    semicolons, spaces and new lines separate. The length is checked before the text is split.
    """
    if not text_in or not text_in.strip():
        return np.empty(0)
    if len(text_in) > MAX_PREDICT_CHARS:
        raise FitError(
            f"Type at most {MAX_PREDICT_VALUES} x values at a time "
            f"(this text has {len(text_in):,} characters; {MAX_PREDICT_CHARS:,} at most)."
        )
    comma = decimal == ","
    parts = [p for p in re.split(r"[\s;]+" if comma else r"[\s;,]+", text_in.strip()) if p]
    if len(parts) > MAX_PREDICT_VALUES:
        raise FitError(f"Type at most {MAX_PREDICT_VALUES} x values at a time.")
    example = "1,5; 2; 3e2" if comma else "1.5, 2, 3e2"
    out = []
    for p in parts:
        token = p.replace(",", ".") if comma else p
        v = _finite_number(token)
        if v is None:
            raise FitError(f"{text.echo(p)} is not {_what_is_wanted(token)}; type x values like {example}.")
        out.append(v)
    return np.asarray(out, dtype=float)


def check_weighting_choice(value) -> str:
    """The name of a named weighting (``fitting.WEIGHTINGS``; empty: "none"); FitError for an unknown one."""
    rule = value or "none"
    if not isinstance(rule, str) or rule not in fitting.WEIGHTINGS:
        raise FitError(text.unknown_weighting(rule, tuple(fitting.WEIGHTINGS)))
    return rule


def clamp_degree(degree, max_degree: int) -> int:
    """``degree`` as a whole number within 0..max_degree; FitError for non-numbers, NaN and infinities."""
    v = _finite_number(degree)
    if v is None:
        raise FitError(f"The degree must be a whole number from 0 to {int(max_degree)}, not {text.echo(degree)}.")
    return max(0, min(int(max_degree), int(v)))


# ----------------------------------------------------------------------------
# the service


class FitService:
    """Cached computations behind the dashboard. Thread-safe."""

    def __init__(self, store: DatasetStore, *, upload_limit_bytes: int, sample_path: str | Path | None = None):
        self.store = store
        self.upload_limit_bytes = int(upload_limit_bytes)
        self.sample_path = Path(sample_path) if sample_path else SAMPLE_PATH
        self._sample_id: str | None = None
        self._sample_lock = threading.Lock()
        self._selections = _LRU(8)
        self._steady = _LRU(32)
        self._splits = _LRU(32)
        self._models = _LRU(64)

    @property
    def sweeps_computed(self) -> int:
        """How many split views and verdict sweeps were computed (not taken from the cache) so far."""
        return self._splits.misses + self._steady.misses

    # -- datasets -------------------------------------------------------------
    def load_bytes(self, data: bytes, name: str | None, *, sheet: str | int | None = None) -> DatasetInfo:
        """Read an uploaded file's bytes (within the upload limit) and store the table.

        ``name`` carries the suffix that marks a workbook (.xlsx, .xlsm, .xls, .ods); ``sheet``
        picks one of its sheets (default: the engine's choice). A workbook's bytes stay with the
        table so that another sheet can be read (``load_sheet``).
        """
        table = fitting.read_table(data, max_bytes=self.upload_limit_bytes, name=name, sheet=sheet)
        raw = data if table.sheet_names else None
        return self._put(table, name or "upload", sha256=file_sha256(data), raw=raw)

    def load_upload(self, contents: str, filename: str | None) -> DatasetInfo:
        """Decode a ``dcc.Upload`` data URL (size checked first) and store its table."""
        data = decode_upload(contents, self.upload_limit_bytes)
        return self.load_bytes(data, filename)

    def load_text(self, pasted: str | None, name: str = PASTED_NAME) -> DatasetInfo:
        """A table pasted as text (cells copied from a spreadsheet, or any text table), read like an upload."""
        if not isinstance(pasted, str) or not pasted.strip():
            raise fitting.IntakeError("Paste a table first: cells copied from a spreadsheet, or a text table.")
        data = pasted.encode("utf-8")
        if len(data) > self.upload_limit_bytes:
            raise fitting.FileTooLargeError(
                _too_large(len(data), self.upload_limit_bytes).replace("The file is", "The pasted table is", 1)
            )
        return self.load_bytes(data, name)

    def load_sheet(self, ds_id: str, sheet: str) -> DatasetInfo:
        """Another sheet of a stored workbook, read from the bytes kept with it, stored as a new dataset."""
        stored = self.store.get(ds_id)
        raw = stored.meta.get("raw")
        if raw is None:
            raise fitting.IntakeError(f"{text.echo(stored.name)} is not a workbook, so it has no other sheets.")
        if sheet not in stored.table.sheet_names:
            raise fitting.IntakeError(f"{text.echo(stored.name)} has no sheet named {text.echo(sheet)}.")
        return self.load_bytes(raw, stored.name, sheet=sheet)

    def load_path(self, path: str | Path) -> DatasetInfo:
        """Read a file on this machine (any size) and store its table."""
        path = Path(path)
        table = fitting.read_table(path, max_bytes=max(self.upload_limit_bytes, path.stat().st_size), name=path.name)
        return self._put(table, path.name, sha256=file_sha256(path))

    def find_loaded(self, name: str, digest: str | None = None, sheet: str | None = None) -> DatasetInfo | None:
        """The most recent dataset this browser session may see that was read from a file called ``name``.

        With ``digest``, one whose content matches is preferred, and with ``sheet`` that sheet of it;
        a name match is taken otherwise.
        """
        found = [(k, d) for k, d in self.store.visible_items() if d.name == name]
        same = [p for p in found if digest and p[1].meta.get("digest") == digest]
        exact = [p for p in same if sheet and p[1].table.sheet == sheet]
        pick = (exact or same or found or [None])[-1]
        if pick is None:
            return None
        try:
            return self.info(pick[0])
        except DatasetGone:  # evicted since the list was taken
            return None

    def sample_id(self) -> str:
        """Id of the start-up dataset, reloading it if it was evicted."""
        with self._sample_lock:
            if self._sample_id is None or self._sample_id not in self.store:
                self._sample_id = self.load_path(self.sample_path).id
            return self._sample_id

    def _put(self, table: Table, name: str, *, sha256: str = "", raw: bytes | None = None) -> DatasetInfo:
        # room for the table and for the column selections made from it (and a workbook's bytes)
        nbytes = 2 * int(table.frame.memory_usage(deep=True).sum()) + (len(raw) if raw else 0)
        meta = {"sha256": sha256, "digest": sha256[:DIGEST_CHARS], "raw": raw}
        stored = StoredDataset(name=name, table=table, nbytes=nbytes, meta=meta)
        key = self.store.put(stored)
        info = self._describe(key, stored)
        stored.meta["info"] = info
        return info

    def _describe(self, key: str, stored: StoredDataset) -> DatasetInfo:
        rep = stored.table.report
        dx, dy, note = stored.table.default_choice()  # intake guarantees two numeric columns
        return DatasetInfo(
            id=key,
            name=stored.name,
            columns=tuple(str(c) for c in rep.columns),
            numeric_columns=tuple(str(c) for c in rep.numeric_columns),
            default_x=str(dx),
            default_y=str(dy),
            report_lines=tuple(rep.summary_lines()),
            units={str(k): str(v) for k, v in (rep.units or {}).items() if v},
            rows=int(rep.rows_read),
            decimal=str(rep.decimal or "."),
            digest=str(stored.meta.get("digest", "")),
            sheet=rep.sheet,
            sheet_names=tuple(str(n) for n in rep.sheet_names),
            choice_note=note,
            head_lines=tuple(rep.summary_lines()[:2]),
            notes=tuple(rep.notes),
        )

    def info(self, ds_id: str) -> DatasetInfo:
        """The description of a stored dataset; DatasetGone when it was evicted."""
        stored = self.store.get(ds_id)
        info = stored.meta.get("info")
        if info is None:
            info = self._describe(ds_id, stored)
            stored.meta["info"] = info
        return info

    def selection(self, ds_id: str, cols: Columns) -> Selection:
        """The rows usable with these columns (cached); ColumnError for a clash, FitError below 3 rows.

        Under a named weighting (``cols.weighting``) the weights are the rule's
        (``fitting.weights_for``); rows where the rule is undefined are refused by their line numbers.
        """
        stored = self.store.get(ds_id)  # raises DatasetGone when evicted
        if cols.x == cols.y:
            raise fitting.ColumnError("x and y are the same column; pick two different columns.")
        for role, c in (("weights", cols.weights), ("group", cols.group)):
            if c is not None and c in (cols.x, cols.y):
                raise fitting.ColumnError(f"The {role} column cannot also be x or y; pick another one.")
        rule = check_weighting_choice(cols.weighting)
        if rule != "none" and cols.weights is not None:
            raise FitError(text.weights_and_rule(cols.weights, rule))

        def make():
            sel = stored.table.select(cols.x, cols.y, weights=cols.weights, group=cols.group)
            sel = exclude_lines(sel, cols.excluded)
            if sel.rows_used < 3:
                raise FitError(f"Only {sel.rows_used} usable rows with these columns; a fit needs at least 3.")
            if rule != "none":
                sel = replace(sel, weights=fitting.weights_for(rule, sel.x, sel.y, rows=sel.line_numbers))
            return sel

        return self._selections.get_or_make((ds_id, cols), make)

    # -- sweeps -------------------------------------------------------------------
    def steady_sweep(self, ds_id: str, cols: Columns) -> DegreeSweep:
        """The verdict sweep: the engine's one rule (``fitting.verdict_sweep``), shared with ``degreescope sweep``."""

        def make():
            sel = self.selection(ds_id, cols)
            return fitting.verdict_sweep(sel.x, sel.y, weights=sel.weights, groups=sel.group)

        return self._steady.get_or_make((ds_id, cols), make)

    def split_view(self, ds_id: str, cols: Columns, split: SplitSettings) -> SplitView:
        """The chosen split's sweep over degrees 0..MAX_DEGREE, the verdict sweep and the chart's points (cached)."""
        self.store.get(ds_id)  # owner and eviction check before any cached view of this dataset
        return self._splits.get_or_make((ds_id, cols, split), lambda: self._make_split_view(ds_id, cols, split))

    def _chosen_sweep(self, sel: Selection, split: SplitSettings) -> DegreeSweep:
        degrees = range(0, MAX_DEGREE + 1)
        if split.mode == "kfold":
            folds = np.asarray(sel.group) if sel.group is not None else split.folds
            return fitting.sweep_degrees(
                sel.x, sel.y, degrees=degrees, folds=folds, seed=split.seed, weights=sel.weights
            )
        return fitting.sweep_degrees(
            sel.x,
            sel.y,
            degrees=degrees,
            holdout=split.holdout,
            ordered=split.mode == "ordered",
            seed=split.seed,
            weights=sel.weights,
        )

    def _make_split_view(self, ds_id: str, cols: Columns, split: SplitSettings) -> SplitView:
        sel = self.selection(ds_id, cols)
        x, y = sel.x, sel.y
        sweep = self._chosen_sweep(sel, split)
        test = sweep.test_mask if sweep.test_mask is not None else np.zeros(x.size, dtype=bool)
        idx = _chart_rows(x.size)
        tr, te = idx[~test[idx]], idx[test[idx]]
        lo, hi = float(x.min()), float(x.max())
        tlo, thi = (float(v) for v in sweep.display_domain)
        grid = _grid(lo, hi, tlo, thi)
        ylo, yhi = float(y.min()), float(y.max())
        pad = Y_PAD * (yhi - ylo or 1.0)
        y_range = (ylo - pad, yhi + pad)
        dens = Density.of(x, y, test, (grid[0], grid[-1]), y_range) if x.size > DENSITY_FROM else None
        return SplitView(
            columns=cols,
            split=split,
            x_name=str(sel.x_name),
            y_name=str(sel.y_name),
            x_unit=sel.x_unit,
            y_unit=sel.y_unit,
            rows_used=int(sel.rows_used),
            rows_dropped=int(sel.rows_dropped),
            train_x=x[tr],
            train_y=y[tr],
            test_x=x[te],
            test_y=y[te],
            points_shown=int(idx.size),
            sampled=idx.size < x.size,
            has_test_points=bool(te.size),
            data_range=(lo, hi),
            training_range=(tlo, thi),
            grid=grid,
            sweep=sweep,
            steady=self.steady_sweep(ds_id, cols),
            max_degree=int(min(MAX_DEGREE, int(sweep.degrees.max()))),
            y_range=y_range,
            density=dens,
        )

    # -- one degree -----------------------------------------------------------------
    def degree_view(self, ds_id: str, cols: Columns, split: SplitSettings, degree) -> DegreeView:
        """Curve, bands and the chosen split's numbers at one degree: no pass over the rows.

        Under a named weighting the prediction band uses the weight the rule gives at each x of
        the grid (variance s²/w(x0)); with a weights column or none, a new reading has weight 1.
        """
        view = self.split_view(ds_id, cols, split)
        d = clamp_degree(degree, view.max_degree)
        sweep = view.sweep
        curve = sweep.curve(d, view.grid)
        weight = None if cols.weighting == "none" else fitting.weight_at(cols.weighting, view.grid, curve)
        clo, chi = sweep.band(d, view.grid, "confidence", 0.95)
        plo, phi = sweep.band(d, view.grid, "prediction", 0.95, weight=weight)
        i = sweep.index(d)
        return DegreeView(
            degree=d,
            curve=curve,
            conf_lo=clo,
            conf_hi=chi,
            pred_lo=plo,
            pred_hi=phi,
            train_rmse=float(sweep.train_rmse[i]),
            test_rmse=float(sweep.test_rmse[i]),
            test_rmse_se=_se(sweep, i),
            train_r2=_drawn_r2(sweep, d) if sweep.test_mask is None else float(sweep.train_r2[i]),
            test_r2=float(sweep.test_r2[i]),
            warnings=tuple(view.steady.warnings_for(d)),
        )

    # -- the precise model ------------------------------------------------------------
    def model_view(self, ds_id: str, cols: Columns, split: SplitSettings, degree) -> ModelView:
        """The precise fit (``fitting.fit_polynomial``) on the training rows of the split, cached per degree."""
        view = self.split_view(ds_id, cols, split)
        d = clamp_degree(degree, view.max_degree)
        return self._models.get_or_make((ds_id, cols, split, d), lambda: self._make_model_view(ds_id, cols, view, d))

    def _make_model_view(self, ds_id: str, cols: Columns, view: SplitView, d: int) -> ModelView:
        sel = self.selection(ds_id, cols)
        mask = view.sweep.test_mask
        keep = np.ones(sel.x.size, dtype=bool) if mask is None else ~mask
        named = cols.weighting != "none"  # the rule itself, so that intervals at a new x use its weight there
        fit = fitting.fit_polynomial(
            sel.x[keep],
            sel.y[keep],
            d,
            weights=None if sel.weights is None or named else sel.weights[keep],
            weighting=cols.weighting if named else None,
            x_name=sel.x_name,
            y_name=sel.y_name,
            x_unit=sel.x_unit,
            y_unit=sel.y_unit,
        )
        # residuals of the chart's points (all rows when few, else the same sample)
        rx = np.concatenate([view.train_x, view.test_x])
        ry = np.concatenate([view.train_y, view.test_y])
        i = view.sweep.index(d)
        return ModelView(
            fit=fit,
            t_quantile=fitting.t_quantile(0.95, fit.dof) if fit.dof > 0 else float("nan"),  # Student t, 95 % two-sided
            residual_x=rx,
            residuals=ry - fit.predict(rx),
            residual_sampled=view.sampled,
            every_row=mask is None,
            split_label=view.split_label,
            x_unit=view.x_unit,
            y_unit=view.y_unit,
            test_rmse=float(view.sweep.test_rmse[i]),
            test_rmse_se=_se(view.sweep, i),
            test_r2=float(view.sweep.test_r2[i]),
        )

    def predict(self, ds_id: str, cols: Columns, split: SplitSettings, degree, x) -> PredictionView:
        """Predictions and 95 % confidence and prediction bands of the precise fit at ``x``."""
        fit = self.model_view(ds_id, cols, split, degree).fit
        x = np.asarray(x, dtype=float)
        clo, chi = fit.band(x, "confidence", 0.95)
        plo, phi = fit.band(x, "prediction", 0.95)
        return PredictionView(
            x=x,
            y=fit.predict(x),
            conf_lo=clo,
            conf_hi=chi,
            pred_lo=plo,
            pred_hi=phi,
            outside=fit.outside_domain(x),
            domain=fit.domain,
        )

    def row_predictions(
        self, ds_id: str, cols: Columns, split: SplitSettings, degree
    ) -> tuple[Selection, PredictionView]:
        """(selection, prediction view) at every data row, for the predictions CSV."""
        sel = self.selection(ds_id, cols)
        return sel, self.predict(ds_id, cols, split, degree, sel.x)


def _se(sweep: DegreeSweep, i: int) -> float:
    """The test RMSE's standard error across splits; NaN for a single holdout."""
    return float(sweep.test_rmse_se[i]) if sweep.n_splits > 1 else float("nan")


def _drawn_r2(sweep: DegreeSweep, d: int) -> float:
    """R² of the drawn fit (every row, folds): 1 − RSS_d / RSS_0 from its R factor, as the precise fit reports it."""
    r = sweep.display_r
    rss, tss = (float(np.sum(r[p:, -1] ** 2)) for p in (d + 1, 1))
    return 1.0 - rss / tss if tss > 0 else float("nan")


def _chart_rows(n: int) -> np.ndarray:
    """Rows drawn on the chart: all, or a uniform random sample that keeps the density and the train/test mix."""
    if n <= MAX_POINTS:
        return np.arange(n)
    rng = np.random.default_rng(12345)
    return np.sort(rng.choice(n, size=MAX_POINTS, replace=False))


def _grid(lo: float, hi: float, train_lo: float, train_hi: float) -> np.ndarray:
    """x values of the drawn curve: the data range padded on both sides, plus the range ends."""
    span = hi - lo
    grid = np.linspace(lo - PAD * span, hi + PAD * span, GRID_POINTS)
    return np.unique(np.concatenate([grid, [lo, hi, train_lo, train_hi]]))
