"""Data intake and column pickers: the upload, the intake report, x, y, weights and group.

A new dataset (uploaded, or the start-up sample) fills the pickers; settings in the URL are
applied when they fit the file's columns.
"""

from __future__ import annotations

from dash import Input, Output, State, dcc, html, no_update

from fitting import DegreescopeError

from .. import components, ids, text
from ..service import SPLIT_MODES, FitService
from ._common import PageConfig, notice_on_error, panel, whole
from .settings import parse_query

SLOT = "side"


def _size_text(limit: int) -> str:
    return f"{limit / 2**20:.0f} MiB" if limit >= 2**20 else f"{limit:,} bytes"


def layout(cfg: PageConfig) -> list:
    """The intake panel (upload box, notices, report) and the columns panel."""
    upload = dcc.Upload(
        id=ids.UPLOAD,
        children=html.Div(
            [
                html.Strong("Drop a CSV or text table here"),
                html.Span(" or click to choose a file"),
                html.Div(f"up to {_size_text(cfg.upload_limit_bytes)}; stays on this server", className="muted small"),
            ]
        ),
        multiple=False,
        max_size=cfg.upload_max_size,
        className="upload",
        className_active="upload upload-active",
    )
    intake = panel(
        "Data intake",
        html.Div(upload, id=ids.UPLOAD_BOX, **{"data-limit": str(cfg.upload_limit_bytes)}),
        html.Div(id=ids.UPLOAD_SIZE_WARNING, className="notice notice-error", role="status"),
        html.Div(id=ids.UPLOAD_NOTICE, className="notice", role="status"),
        html.Div(id=ids.INTAKE_REPORT, className="intake"),
    )
    columns = panel(
        "Columns",
        html.Label("x (the input you measure or set)", htmlFor=ids.X_COLUMN),
        dcc.Dropdown(id=ids.X_COLUMN, clearable=False),
        html.Label("y (the response to predict)", htmlFor=ids.Y_COLUMN),
        dcc.Dropdown(id=ids.Y_COLUMN, clearable=False),
        html.Label("weights (optional, e.g. 1/variance)", htmlFor=ids.WEIGHTS_COLUMN),
        dcc.Dropdown(id=ids.WEIGHTS_COLUMN, placeholder="none"),
        html.Label("group (optional: runs, batches, plates)", htmlFor=ids.GROUP_COLUMN),
        dcc.Dropdown(id=ids.GROUP_COLUMN, placeholder="none"),
    )
    return [intake, columns]


# ----------------------------------------------------------------------------
# upload

UPLOAD_OUTPUT = dict(dataset=Output(ids.DATASET, "data"), notice=Output(ids.UPLOAD_NOTICE, "children"))
UPLOAD_INPUTS = dict(contents=Input(ids.UPLOAD, "contents"))
UPLOAD_STATE = dict(filename=State(ids.UPLOAD, "filename"))


def on_upload(service: FitService, contents, filename) -> dict:
    """Read an uploaded file into the server's store; the page keeps only its record."""
    if not contents:
        return dict(dataset=no_update, notice=no_update)
    info = service.load_upload(contents, filename)
    return dict(dataset=info.to_store(), notice=text.loaded(info.name, info.rows))


# ----------------------------------------------------------------------------
# a dataset arrives: pickers, and the URL's settings when they fit

DATASET_OUTPUT = dict(
    intake=Output(ids.INTAKE_REPORT, "children"),
    x_options=Output(ids.X_COLUMN, "options"),
    x=Output(ids.X_COLUMN, "value"),
    y_options=Output(ids.Y_COLUMN, "options"),
    y=Output(ids.Y_COLUMN, "value"),
    weights_options=Output(ids.WEIGHTS_COLUMN, "options"),
    weights=Output(ids.WEIGHTS_COLUMN, "value"),
    group_options=Output(ids.GROUP_COLUMN, "options"),
    group=Output(ids.GROUP_COLUMN, "value"),
    mode=Output(ids.SPLIT_MODE, "value"),
    holdout=Output(ids.HOLDOUT, "value"),
    folds=Output(ids.FOLDS, "value"),
    seed=Output(ids.SEED, "value"),
    degree=Output(ids.DEGREE, "value"),
)
DATASET_INPUTS = dict(dataset=Input(ids.DATASET, "data"))
DATASET_STATE = dict(search=State(ids.URL, "search"))
DEFAULT_SETTINGS = dict(mode="holdout", holdout=25, folds=10, seed=0, degree=None)


def _settings_from_query(q: dict) -> dict:
    """Split settings and degree from the URL, each brought into its allowed range."""
    return dict(
        mode=q.get("mode") if q.get("mode") in SPLIT_MODES else "holdout",
        holdout=min(50, max(10, whole(q.get("holdout"), 25))),
        folds=min(50, max(2, whole(q.get("k"), 10))),
        seed=max(0, whole(q.get("seed"), 0)),
        degree=whole(q.get("degree")),
    )


def on_dataset(service: FitService, dataset, search) -> dict:
    """Column pickers and intake report for a dataset; settings from the URL when they fit it."""
    info = service.info(dataset["id"]) if dataset else None
    if info is None:
        raise DegreescopeError("No dataset is loaded; upload a file.")
    q = parse_query(search)
    numeric, cols = list(info.numeric_columns), list(info.columns)
    use_q = q.get("x") in numeric and q.get("y") in numeric and q.get("x") != q.get("y")
    opts = [{"label": c, "value": c} for c in numeric]
    return dict(
        intake=components.intake_children(info),
        x_options=opts,
        x=q["x"] if use_q else info.default_x,
        y_options=opts,
        y=q["y"] if use_q else info.default_y,
        weights_options=opts,
        weights=q.get("w") if use_q and q.get("w") in numeric else None,
        group_options=[{"label": c, "value": c} for c in cols],
        group=q.get("g") if use_q and q.get("g") in cols else None,
        **(_settings_from_query(q) if use_q else DEFAULT_SETTINGS),
    )


def register(app, service: FitService) -> None:
    """Wire the upload and the dataset callbacks."""
    app.callback(
        output=UPLOAD_OUTPUT,
        inputs=UPLOAD_INPUTS,
        state=UPLOAD_STATE,
        prevent_initial_call=True,
        on_error=notice_on_error(UPLOAD_OUTPUT, "notice"),
    )(lambda contents, filename: on_upload(service, contents, filename))
    app.callback(
        output=DATASET_OUTPUT,
        inputs=DATASET_INPUTS,
        state=DATASET_STATE,
        on_error=notice_on_error(DATASET_OUTPUT, "intake", components.error_paragraph),
    )(lambda dataset, search: on_dataset(service, dataset, search))
