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

The steady measure
------------------
A single holdout of a small dataset is a noisy judge of degree. The recommendation
and the overfitting warning therefore always come from 10-fold cross-validation,
repeated 5 times when the data are small (grouped folds when a group column is
chosen), whatever split the charts show.
"""

from __future__ import annotations

import base64
import binascii
import math
import re
import threading
from collections import OrderedDict
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Callable

import numpy as np
from scipy.special import stdtrit

import fitting
from fitting import DegreescopeError, FitError

from .store import DatasetStore, StoredDataset

__all__ = [
    "Columns",
    "SplitSettings",
    "FitService",
    "DatasetInfo",
    "SplitView",
    "DegreeView",
    "ModelView",
    "PredictionView",
    "SAMPLE_PATH",
    "parse_x_values",
]

SAMPLE_PATH = Path(__file__).resolve().parent.parent / "sample_data" / "sensor_calibration.csv"
MAX_DEGREE = 20
MAX_POINTS = 20_000  # points drawn on the chart; fits always use every row
GRID_POINTS = 400
PAD = 0.06  # share of the x range drawn beyond the data on each side
STEADY_FOLDS = 10
STEADY_REPEATS_SMALL = 5  # repeated 10-fold CV below STEADY_SMALL_ROWS rows
STEADY_SMALL_ROWS = 5_000
MAX_PREDICT_VALUES = 1_000


# ----------------------------------------------------------------------------
# settings


@dataclass(frozen=True)
class Columns:
    x: str
    y: str
    weights: str | None = None
    group: str | None = None


@dataclass(frozen=True)
class SplitSettings:
    """How the charts split the rows. ``mode``: "holdout", "ordered" or "kfold"."""

    mode: str = "holdout"
    holdout: float = 0.25
    folds: int = 10
    seed: int = 0

    @staticmethod
    def parse(mode, holdout, folds, seed) -> SplitSettings:
        mode = mode if mode in ("holdout", "ordered", "kfold") else "holdout"
        try:
            frac = float(holdout)
        except (TypeError, ValueError):
            raise FitError("The holdout share must be a number between 10 and 50 (per cent).") from None
        if frac > 1:  # the page gives per cent
            frac /= 100.0
        if not (0.10 - 1e-9 <= frac <= 0.50 + 1e-9):
            raise FitError(f"The holdout share must be between 10 % and 50 %, not {frac:.0%}.")
        try:
            k = int(folds)
            s = int(seed)
        except (TypeError, ValueError):
            raise FitError("The number of folds and the seed must be whole numbers.") from None
        if not (2 <= k <= 50):
            raise FitError(f"Use between 2 and 50 folds, not {k}; 5 or 10 are common.")
        if s < 0:
            raise FitError("The seed must be 0 or a positive whole number.")
        return SplitSettings(mode=mode, holdout=round(frac, 4), folds=k, seed=s)


# ----------------------------------------------------------------------------
# views (plain data for figure builders, tables and exports)


@dataclass(frozen=True)
class DatasetInfo:
    id: str
    name: str
    columns: tuple[str, ...]
    numeric_columns: tuple[str, ...]
    default_x: str
    default_y: str
    report_lines: tuple[str, ...]
    units: dict[str, str]
    rows: int

    def to_store(self) -> dict:
        return {
            "id": self.id,
            "name": self.name,
            "columns": list(self.columns),
            "numeric": list(self.numeric_columns),
            "x": self.default_x,
            "y": self.default_y,
        }


@dataclass(frozen=True, eq=False)
class SplitView:
    columns: Columns
    split: SplitSettings
    x_label: str
    y_label: str
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
    sweep: Any  # the chosen split's DegreeSweep
    steady: Any  # the DegreeSweep the verdict rests on
    max_degree: int
    split_label: str
    steady_label: str

    @property
    def recommended_degree(self) -> int:
        return int(self.steady.recommended_degree)


@dataclass(frozen=True, eq=False)
class DegreeView:
    degree: int
    curve: np.ndarray
    conf_lo: np.ndarray
    conf_hi: np.ndarray
    pred_lo: np.ndarray
    pred_hi: np.ndarray
    train_rmse: float
    test_rmse: float
    test_rmse_se: float
    train_r2: float
    test_r2: float
    warnings: tuple[str, ...]
    caption: tuple[str, str]  # two lines of plain text


@dataclass(frozen=True, eq=False)
class ModelView:
    fit: Any  # fitting.PolynomialFit
    coefficient_rows: list[dict]
    equation: str
    t_quantile: float
    residual_x: np.ndarray
    residuals: np.ndarray
    residual_sampled: bool
    fitted_on: str
    fitted_rows: str
    test_rmse: float
    test_rmse_se: float
    test_r2: float


@dataclass(frozen=True, eq=False)
class PredictionView:
    x: np.ndarray
    y: np.ndarray
    conf_lo: np.ndarray
    conf_hi: np.ndarray
    pred_lo: np.ndarray
    pred_hi: np.ndarray
    outside: np.ndarray
    domain: tuple[float, float]


# ----------------------------------------------------------------------------
# a small thread-safe LRU


class _LRU:
    def __init__(self, maxsize: int):
        self.maxsize = maxsize
        self._d: OrderedDict = OrderedDict()
        self._lock = threading.Lock()
        self.hits = 0
        self.misses = 0

    def get_or_make(self, key, make: Callable[[], Any]):
        with self._lock:
            if key in self._d:
                self._d.move_to_end(key)
                self.hits += 1
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
# intake


def _read_table(source: bytes | str | Path, *, max_bytes: int, name: str | None):
    """Read a table with the engine's reader (``fitting.read_table``)."""
    return fitting.read_table(source, max_bytes=max_bytes, name=name)


def _table_nbytes(table, fallback: int) -> int:
    for attr in ("nbytes",):
        v = getattr(table, attr, None)
        if isinstance(v, (int, np.integer)):
            return int(v)
    frame = getattr(table, "frame", None)
    if frame is not None and hasattr(frame, "memory_usage"):
        return int(frame.memory_usage(deep=True).sum())
    return int(fallback)


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

    return f"The file is {mb(size)}, over this server's upload limit of {mb(limit)}; use a smaller file or ask for a higher limit."


def parse_x_values(text: str | None) -> np.ndarray:
    """x values typed by the user: numbers separated by commas, semicolons, spaces or new lines."""
    if not text or not text.strip():
        return np.empty(0)
    parts = [p for p in re.split(r"[\s;,]+", text.strip()) if p]
    if len(parts) > MAX_PREDICT_VALUES:
        raise FitError(f"Type at most {MAX_PREDICT_VALUES} x values at a time.")
    out = []
    for p in parts:
        try:
            v = float(p)
        except ValueError:
            raise FitError(f"{p[:40]!r} is not a number; type x values like 1.5, 2, 3e2.") from None
        if not math.isfinite(v):
            raise FitError(f"{p[:40]!r} is not a finite number.")
        out.append(v)
    return np.asarray(out, dtype=float)


def _fmt(v: float, digits: int = 4) -> str:
    if v is None or not np.isfinite(v):
        return "—"
    return f"{v:.{digits}g}"


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

    # -- datasets -------------------------------------------------------------
    def load_bytes(self, data: bytes, name: str | None) -> DatasetInfo:
        table = _read_table(data, max_bytes=self.upload_limit_bytes, name=name)
        return self._put(table, name or "upload", len(data))

    def load_upload(self, contents: str, filename: str | None) -> DatasetInfo:
        data = decode_upload(contents, self.upload_limit_bytes)
        return self.load_bytes(data, filename)

    def load_path(self, path: str | Path) -> DatasetInfo:
        path = Path(path)
        table = _read_table(path, max_bytes=max(self.upload_limit_bytes, path.stat().st_size), name=path.name)
        return self._put(table, path.name, path.stat().st_size)

    def sample_id(self) -> str:
        """Id of the start-up dataset, reloading it if it was evicted."""
        with self._sample_lock:
            if self._sample_id is None or self._sample_id not in self.store:
                self._sample_id = self.load_path(self.sample_path).id
            return self._sample_id

    def _put(self, table, name: str, raw_size: int) -> DatasetInfo:
        # room for the table and for the column selections made from it
        nbytes = 2 * _table_nbytes(table, fallback=4 * raw_size)
        stored = StoredDataset(name=name, table=table, nbytes=nbytes)
        key = self.store.put(stored)
        info = self._describe(key, stored)
        stored.meta["info"] = info
        return info

    def _describe(self, key: str, stored: StoredDataset) -> DatasetInfo:
        table = stored.table
        rep = table.report
        try:
            dx, dy = table.default_xy()
        except DegreescopeError:
            dx, dy = None, None
        numeric = tuple(str(c) for c in rep.numeric_columns)
        if dx is None:
            raise fitting.ColumnError(
                "The file needs at least two numeric columns (x and y); this one has "
                f"{len(numeric)}. Check the delimiter and the decimal mark."
            )
        return DatasetInfo(
            id=key,
            name=stored.name,
            columns=tuple(str(c) for c in rep.columns),
            numeric_columns=numeric,
            default_x=str(dx),
            default_y=str(dy),
            report_lines=tuple(rep.summary_lines()),
            units={str(k): str(v) for k, v in (rep.units or {}).items() if v},
            rows=int(rep.rows_read),
        )

    def info(self, ds_id: str) -> DatasetInfo:
        stored = self.store.get(ds_id)
        info = stored.meta.get("info")
        if info is None:
            info = self._describe(ds_id, stored)
            stored.meta["info"] = info
        return info

    def selection(self, ds_id: str, cols: Columns):
        stored = self.store.get(ds_id)  # raises DatasetGone when evicted
        if cols.x == cols.y:
            raise fitting.ColumnError("x and y are the same column; pick two different columns.")
        for role, c in (("weights", cols.weights), ("group", cols.group)):
            if c is not None and c in (cols.x, cols.y):
                raise fitting.ColumnError(f"The {role} column cannot also be x or y; pick another one.")

        def make():
            sel = stored.table.select(cols.x, cols.y, weights=cols.weights, group=cols.group)
            if sel.rows_used < 3:
                raise FitError(f"Only {sel.rows_used} usable rows with these columns; a fit needs at least 3.")
            return sel

        return self._selections.get_or_make((ds_id, cols), make)

    # -- sweeps -------------------------------------------------------------------
    def steady_sweep(self, ds_id: str, cols: Columns):
        """The verdict's sweep: 10-fold CV (repeated when small), or grouped folds."""

        def make():
            sel = self.selection(ds_id, cols)
            n = sel.rows_used
            degrees = range(0, MAX_DEGREE + 1)
            if sel.group is not None:
                return fitting.sweep_degrees(
                    sel.x, sel.y, degrees=degrees, folds=np.asarray(sel.group), weights=sel.weights
                )
            k = min(STEADY_FOLDS, n)
            repeats = STEADY_REPEATS_SMALL if n <= STEADY_SMALL_ROWS else 1
            return fitting.sweep_degrees(
                sel.x, sel.y, degrees=degrees, folds=k, repeats=repeats, seed=0, weights=sel.weights
            )

        return self._steady.get_or_make((ds_id, cols), make)

    def split_view(self, ds_id: str, cols: Columns, split: SplitSettings) -> SplitView:
        return self._splits.get_or_make((ds_id, cols, split), lambda: self._make_split_view(ds_id, cols, split))

    def _make_split_view(self, ds_id: str, cols: Columns, split: SplitSettings) -> SplitView:
        sel = self.selection(ds_id, cols)
        x, y = sel.x, sel.y
        degrees = range(0, MAX_DEGREE + 1)
        if split.mode == "kfold":
            folds = np.asarray(sel.group) if sel.group is not None else split.folds
            sweep = fitting.sweep_degrees(x, y, degrees=degrees, folds=folds, seed=split.seed, weights=sel.weights)
        else:
            sweep = fitting.sweep_degrees(
                x,
                y,
                degrees=degrees,
                holdout=split.holdout,
                ordered=split.mode == "ordered",
                seed=split.seed,
                weights=sel.weights,
            )
        steady = self.steady_sweep(ds_id, cols)
        test = sweep.test_mask if sweep.test_mask is not None else np.zeros(x.size, dtype=bool)
        n = x.size
        sampled = n > MAX_POINTS
        if sampled:
            # a uniform random sample keeps the density of the points (and the train/test mix)
            rng = np.random.default_rng(12345)
            idx = np.sort(rng.choice(n, size=MAX_POINTS, replace=False))
        else:
            idx = np.arange(n)
        tr = idx[~test[idx]]
        te = idx[test[idx]]
        lo, hi = float(x.min()), float(x.max())
        span = hi - lo
        grid = np.linspace(lo - PAD * span, hi + PAD * span, GRID_POINTS)
        tlo, thi = (float(v) for v in sweep.display_domain)
        grid = np.unique(np.concatenate([grid, [lo, hi, tlo, thi]]))
        x_label = _axis_label(sel.x_name, sel.x_unit)
        y_label = _axis_label(sel.y_name, sel.y_unit)
        if sel.group is not None:
            steady_label = f"grouped folds by {cols.group!r} ({steady.n_splits} groups)"
        else:
            steady_label = steady.scheme
        return SplitView(
            columns=cols,
            split=split,
            x_label=x_label,
            y_label=y_label,
            x_unit=sel.x_unit,
            y_unit=sel.y_unit,
            rows_used=int(sel.rows_used),
            rows_dropped=int(sel.rows_dropped),
            train_x=x[tr],
            train_y=y[tr],
            test_x=x[te],
            test_y=y[te],
            points_shown=int(idx.size),
            sampled=sampled,
            has_test_points=bool(te.size),
            data_range=(lo, hi),
            training_range=(tlo, thi),
            grid=grid,
            sweep=sweep,
            steady=steady,
            max_degree=int(min(MAX_DEGREE, int(sweep.degrees.max()))),
            split_label=sweep.scheme,
            steady_label=steady_label,
        )

    # -- one degree -----------------------------------------------------------------
    def degree_view(self, ds_id: str, cols: Columns, split: SplitSettings, degree: int) -> DegreeView:
        view = self.split_view(ds_id, cols, split)
        d = clamp_degree(degree, view.max_degree)
        sw = view.sweep
        curve = sw.curve(d, view.grid)
        clo, chi = sw.band(d, view.grid, "confidence", 0.95)
        plo, phi = sw.band(d, view.grid, "prediction", 0.95)
        i = sw.index(d)
        se = float(sw.test_rmse_se[i]) if sw.n_splits > 1 else float("nan")
        warns = tuple(view.steady.warnings_for(d))
        test_name = "CV test" if view.split.mode == "kfold" else "test"
        caption = (
            f"Degree {d} · {test_name} RMSE {_fmt(float(sw.test_rmse[i]))}"
            + (f" ± {_fmt(se, 2)}" if np.isfinite(se) else "")
            + f" · R² train {_fmt(float(sw.train_r2[i]), 5)}, {test_name} {_fmt(float(sw.test_r2[i]), 5)}",
            f"Split: {view.split_label} · {view.rows_used:,} rows",
        )
        return DegreeView(
            degree=d,
            curve=curve,
            conf_lo=clo,
            conf_hi=chi,
            pred_lo=plo,
            pred_hi=phi,
            train_rmse=float(sw.train_rmse[i]),
            test_rmse=float(sw.test_rmse[i]),
            test_rmse_se=se,
            train_r2=float(sw.train_r2[i]),
            test_r2=float(sw.test_r2[i]),
            warnings=warns,
            caption=caption,
        )

    # -- the precise model ------------------------------------------------------------
    def model_view(self, ds_id: str, cols: Columns, split: SplitSettings, degree: int) -> ModelView:
        view = self.split_view(ds_id, cols, split)
        d = clamp_degree(degree, view.max_degree)
        return self._models.get_or_make((ds_id, cols, split, d), lambda: self._make_model_view(ds_id, cols, view, d))

    def _make_model_view(self, ds_id, cols: Columns, view: SplitView, d: int) -> ModelView:
        sel = self.selection(ds_id, cols)
        mask = view.sweep.test_mask
        keep = np.ones(sel.x.size, dtype=bool) if mask is None else ~mask
        w = None if sel.weights is None else sel.weights[keep]
        fit = fitting.fit_polynomial(
            sel.x[keep],
            sel.y[keep],
            d,
            weights=w,
            x_name=sel.x_name,
            y_name=sel.y_name,
            x_unit=sel.x_unit,
            y_unit=sel.y_unit,
        )
        q = float(stdtrit(fit.dof, 0.975)) if fit.dof > 0 else float("nan")  # Student t quantile
        rows = []
        for k, (c, se) in enumerate(zip(fit.coefficients, fit.standard_errors, strict=False)):
            unit = _coef_unit(view.x_unit, view.y_unit, k)
            rows.append(
                {
                    "term": "1" if k == 0 else ("x" if k == 1 else f"x^{k}"),
                    "power": k,
                    "coefficient": float(c),
                    "se": float(se),
                    "ci_lo": float(c - q * se) if np.isfinite(q) else float("nan"),
                    "ci_hi": float(c + q * se) if np.isfinite(q) else float("nan"),
                    "unit": unit,
                }
            )
        # residuals of the chart's points (all rows when few, else the same sample)
        rx = np.concatenate([view.train_x, view.test_x])
        ry = np.concatenate([view.train_y, view.test_y])
        res = ry - fit.predict(rx)
        i = view.sweep.index(d)
        fitted_on = (
            f"every one of the {fit.n:,} rows"
            if mask is None
            else f"the {fit.n:,} training rows of the {view.split_label} (switch to k-fold to fit every row)"
        )
        return ModelView(
            fit=fit,
            coefficient_rows=rows,
            equation=fit.equation(digits=8, x="x", y="y"),
            t_quantile=q,
            residual_x=rx,
            residuals=res,
            residual_sampled=view.sampled,
            fitted_on=fitted_on,
            fitted_rows=f"all {fit.n:,} rows" if mask is None else f"the {fit.n:,} training rows",
            test_rmse=float(view.sweep.test_rmse[i]),
            test_rmse_se=float(view.sweep.test_rmse_se[i]) if view.sweep.n_splits > 1 else float("nan"),
            test_r2=float(view.sweep.test_r2[i]),
        )

    def predict(self, ds_id: str, cols: Columns, split: SplitSettings, degree: int, x) -> PredictionView:
        model = self.model_view(ds_id, cols, split, degree)
        fit = model.fit
        x = np.asarray(x, dtype=float)
        y = fit.predict(x)
        clo, chi = fit.band(x, "confidence", 0.95)
        plo, phi = fit.band(x, "prediction", 0.95)
        return PredictionView(
            x=x,
            y=y,
            conf_lo=clo,
            conf_hi=chi,
            pred_lo=plo,
            pred_hi=phi,
            outside=fit.outside_domain(x),
            domain=fit.domain,
        )

    def row_predictions(self, ds_id: str, cols: Columns, split: SplitSettings, degree: int):
        """(selection, prediction view) at every data row, for the predictions CSV."""
        sel = self.selection(ds_id, cols)
        return sel, self.predict(ds_id, cols, split, degree, sel.x)


def clamp_degree(degree, max_degree: int) -> int:
    try:
        d = int(degree)
    except (TypeError, ValueError):
        d = 0
    return max(0, min(int(max_degree), d))


def _axis_label(name: str, unit: str | None) -> str:
    name = str(name)
    if unit and unit not in name:
        return f"{name} ({unit})"
    return name


def _coef_unit(x_unit: str | None, y_unit: str | None, k: int) -> str:
    if not y_unit and not x_unit:
        return ""
    yu = y_unit or "1"
    if k == 0 or not x_unit:
        return yu if k == 0 or not x_unit else yu
    return f"{yu}/{x_unit}" if k == 1 else f"{yu}/{x_unit}^{k}"
