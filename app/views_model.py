"""The hand-over model: what a user takes away is fitted on every usable row.

Holdout and folds judge a degree; the model on the card, in the model JSON, in the
predictions CSV and in the HTML report is ``fitting.fit_polynomial`` on every usable row
of the columns chosen, whatever split the charts show. The split's own fit (its training
rows) stays on the fit chart as the drawn curve.

Plain functions of the ``FitService`` and its public methods (``split_view``,
``selection``, ``info``, ``store``). The fits are cached per service, dataset, columns and
degree, so a change of split reuses them.
"""

from __future__ import annotations

import threading
import weakref
from collections import OrderedDict
from typing import Any, Callable

import numpy as np

import fitting
from fitting import PolynomialFit, Selection

from . import handover
from .service import Columns, FitService, ModelView, PredictionView, SplitSettings, SplitView, clamp_degree

__all__ = [
    "handover_fit",
    "handover_model",
    "handover_predict",
    "handover_row_predictions",
    "handover_provenance",
    "dataset_sha256",
    "residual_view",
]

FITS_KEPT = 64  # hand-over fits cached per service
_caches: weakref.WeakKeyDictionary = weakref.WeakKeyDictionary()
_caches_lock = threading.Lock()


class _Cache:
    """A small thread-safe least-recently-used cache."""

    def __init__(self, size: int):
        self.size = size
        self._d: OrderedDict = OrderedDict()
        self._lock = threading.Lock()

    def get_or_make(self, key, make: Callable[[], Any]):
        with self._lock:
            if key in self._d:
                self._d.move_to_end(key)
                return self._d[key]
        value = make()  # outside the lock; two threads may compute the same fit, which is harmless
        with self._lock:
            self._d[key] = value
            while len(self._d) > self.size:
                self._d.popitem(last=False)
        return value


def _cache(service: FitService) -> _Cache:
    with _caches_lock:
        cache = _caches.get(service)
        if cache is None:
            cache = _caches[service] = _Cache(FITS_KEPT)
        return cache


def handover_fit(service: FitService, ds_id: str, cols: Columns, degree: int) -> PolynomialFit:
    """The precise fit of ``degree`` on every usable row (cached); the store's owner check runs first.

    Under a named weighting (``cols.weighting``) the fit is made with the rule itself, so the model
    records it and its intervals at a new x use the variance s²/w(x0); with a weights column, the
    column's weights.
    """
    sel = service.selection(ds_id, cols)  # raises DatasetGone for another session's or an evicted id
    named = cols.weighting != "none"

    def make() -> PolynomialFit:
        return fitting.fit_polynomial(
            sel.x,
            sel.y,
            int(degree),
            weights=None if named else sel.weights,
            weighting=cols.weighting if named else None,
            x_name=sel.x_name,
            y_name=sel.y_name,
            x_unit=sel.x_unit,
            y_unit=sel.y_unit,
        )

    return _cache(service).get_or_make((ds_id, cols, int(degree)), make)


def _t_quantile(fit: PolynomialFit, level: float = 0.95) -> float:
    """Student's t quantile for two-sided intervals at ``level`` (NaN without residual degrees of freedom)."""
    return fitting.t_quantile(level, fit.dof) if fit.dof > 0 else float("nan")


def handover_model(
    service: FitService, ds_id: str, cols: Columns, split: SplitSettings, degree, level: float = 0.95
) -> ModelView:
    """The model card's view: the every-row fit, its residuals at the chart's points, and the split's test numbers.

    The test numbers (held-out RMSE ± SE, R²) are the chosen split's at this degree: the same
    figures the chart captions show. ``level`` (a fraction) sets the coefficients' intervals.
    """
    view = service.split_view(ds_id, cols, split)
    d = clamp_degree(degree, view.max_degree)
    fit = handover_fit(service, ds_id, cols, d)
    rx = np.concatenate([view.train_x, view.test_x])
    ry = np.concatenate([view.train_y, view.test_y])
    sweep = view.sweep
    i = sweep.index(d)
    return ModelView(
        fit=fit,
        t_quantile=_t_quantile(fit, level),
        residual_x=rx,
        residuals=ry - fit.predict(rx),
        residual_sampled=view.sampled,
        every_row=True,
        split_label=view.split_label,
        x_unit=view.x_unit,
        y_unit=view.y_unit,
        test_rmse=float(sweep.test_rmse[i]),
        test_rmse_se=float(sweep.test_rmse_se[i]) if sweep.n_splits > 1 else float("nan"),
        test_r2=float(sweep.test_r2[i]),
        level=float(level),
    )


def residual_view(view: SplitView) -> SplitView:
    """The split view with every chart point as one group: the hand-over fit used them all."""
    from dataclasses import replace

    x = np.concatenate([view.train_x, view.test_x])
    y = np.concatenate([view.train_y, view.test_y])
    return replace(view, train_x=x, train_y=y, test_x=x[:0], test_y=y[:0], has_test_points=False)


def _prediction_view(fit: PolynomialFit, x, level: float = 0.95) -> PredictionView:
    x = np.asarray(x, dtype=float)
    clo, chi = fit.band(x, "confidence", level)
    plo, phi = fit.band(x, "prediction", level)
    return PredictionView(
        x=x,
        y=fit.predict(x),
        conf_lo=clo,
        conf_hi=chi,
        pred_lo=plo,
        pred_hi=phi,
        outside=fit.outside_domain(x),
        domain=fit.domain,
        level=float(level),
    )


def handover_predict(
    service: FitService, ds_id: str, cols: Columns, split: SplitSettings, degree, x, level: float = 0.95
) -> PredictionView:
    """Predictions and confidence and prediction bands (at ``level``, 95 % by default) of the hand-over fit at ``x``."""
    return _prediction_view(handover_model(service, ds_id, cols, split, degree).fit, x, level)


def handover_row_predictions(
    service: FitService, ds_id: str, cols: Columns, split: SplitSettings, degree
) -> tuple[Selection, PredictionView]:
    """(selection, prediction view) of the hand-over fit at every usable row, for the predictions CSV."""
    sel = service.selection(ds_id, cols)
    return sel, handover_predict(service, ds_id, cols, split, degree, sel.x)


def dataset_sha256(service: FitService, ds_id: str) -> str | None:
    """The SHA-256 of the file the dataset was read from, as the service kept it (None when it did not)."""
    stored = service.store.get(ds_id)
    digest = stored.meta.get("sha256")
    if digest is None:
        raw = stored.meta.get("source_bytes")
        digest = handover.file_sha256(raw) if isinstance(raw, (bytes, bytearray, memoryview)) else None
    return digest


def handover_provenance(service: FitService, ds_id: str, cols: Columns, left_out=()) -> dict[str, Any]:
    """The model file's ``fitted_from`` block, as the command line writes it (``app.handover.provenance``).

    ``left_out``: the rows the analyst left out on purpose (``views_evidence.Exclusion``: line and
    reason), recorded as ``rows_excluded`` with each row's reason.
    """
    sel = service.selection(ds_id, cols)
    excluded = None
    if left_out:
        reasons = "; ".join(f"line {e.line}: {e.reason or 'no reason given'}" for e in left_out)
        excluded = {"lines": [int(e.line) for e in left_out], "reason": reasons}
    return handover.provenance(
        file_name=service.info(ds_id).name,
        sha256=dataset_sha256(service, ds_id),
        x=sel.x_name,
        y=sel.y_name,
        weights=sel.weights_name,
        group=sel.group_name,
        rows_used=sel.rows_used,
        rows_dropped=sel.rows_dropped,
        dropped=sel.dropped,
        excluded=excluded,
    )
