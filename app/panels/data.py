"""Data intake and column pickers: the upload, the paste box, the sheet picker, the intake report, the columns.

A new dataset (uploaded, pasted, another sheet, or the start-up sample) fills the pickers with
the engine's default columns and the degree starts at the recommended one. A shared URL names
its file (``file``, ``sha``, ``sheet``) besides the settings: when that file is loaded (or this
browser session still holds it) the view is restored; otherwise the page asks for the file and
keeps the view pending until a file of that name is loaded.

The weighting picker (``ids.WEIGHTING``: none, 1/x, 1/x², 1/y, 1/y²; ``fitting.WEIGHTINGS``) sits
under the weights column: it is the one weighting of the page, carried by the settings record
(``settings.split_key``) to the sweeps, the verdict, the charts, the model and every panel. The
address keeps it as ``wt``.

A degree chosen by hand is kept while the columns (dataset, x, y, weights, group) and the
weighting stay the same; when they change the degree moves to the new recommendation
(``charts.on_split``, with the figures, against the signature kept in ``ids.VIEW_COLUMNS``).
"""

from __future__ import annotations

from dash import Input, Output, State, dcc, html, no_update

import fitting
from fitting import DegreescopeError

from .. import components, ids, text
from ..service import SPLIT_MODES, Columns, DatasetInfo, FitService
from ._common import PageConfig, notice_on_error, panel, whole
from .settings import (
    DEFAULT_BANDS,
    bands_from_query,
    from_key,
    level_from_query,
    names_other_file,
    parse_query,
    weighting_from_query,
    with_view_extras,
)

SLOT = "side"
URL_UNREAD = {"search": None, "file": None, "unread": True}  # the view store before the URL was read
WORKBOOK_TYPES = ".xlsx, .xlsm, .xls, .ods"
SHOW, HIDE = {"display": "block"}, {"display": "none"}


def _size_text(limit: int) -> str:
    return f"{limit / 2**20:.0f} MiB" if limit >= 2**20 else f"{limit:,} bytes"


def _upload(cfg: PageConfig) -> dcc.Upload:
    return dcc.Upload(
        id=ids.UPLOAD,
        children=html.Div(
            [
                html.Strong("Drop a CSV, text table or workbook here"),
                html.Span(" or click to choose a file"),
                html.Div(f"workbooks: {WORKBOOK_TYPES}", className="muted small"),
                html.Div(f"up to {_size_text(cfg.upload_limit_bytes)}; stays on this server", className="muted small"),
            ]
        ),
        multiple=False,
        max_size=cfg.upload_max_size,
        className="upload",
        className_active="upload upload-active",
    )


def _paste_box(cfg: PageConfig) -> html.Div:
    return html.Div(
        [
            html.Label(
                "…or paste a table (cells copied from a spreadsheet, or any text table)", htmlFor=ids.PASTE_TEXT
            ),
            # no maxLength: the browser would cut a long paste without a word; the server names the limit
            dcc.Textarea(
                id=ids.PASTE_TEXT,
                className="paste-input",
                placeholder="Paste here: a header row, then one row per line (tabs, ';' or ',' between cells)",
            ),
            html.Button("Use the pasted table", id=ids.PASTE_BUTTON, n_clicks=0, className="btn btn-small"),
        ],
        className="paste-box",
    )


def _sheet_box() -> html.Div:
    return html.Div(
        [
            html.Label("Sheet (this workbook has several)", htmlFor=ids.SHEET),
            dcc.Dropdown(id=ids.SHEET, clearable=False),
        ],
        id=ids.SHEET_BOX,
        style=HIDE,
    )


def layout(cfg: PageConfig) -> list:
    """The intake panel (upload box, paste box, sheet picker, notices, report) and the columns panel."""
    intake = panel(
        "Data intake",
        html.Div(_upload(cfg), id=ids.UPLOAD_BOX, **{"data-limit": str(cfg.upload_limit_bytes)}),
        html.Div(id=ids.UPLOAD_SIZE_WARNING, className="notice notice-error", role="status"),
        _paste_box(cfg),
        html.Div(id=ids.UPLOAD_NOTICE, className="notice", role="status"),
        html.Div(id=ids.VIEW_NOTICE, className="notice notice-view", role="status"),
        _sheet_box(),
        html.Div(id=ids.INTAKE_REPORT, className="intake"),
        dcc.Store(id=ids.VIEW_PENDING, data=dict(URL_UNREAD)),
        dcc.Store(id=ids.VIEW_COLUMNS),
        dcc.Store(id=ids.INTERVAL_LEVEL),
        dcc.Store(id=ids.URL_WANTED),
        dcc.Store(id=ids.URL_APPLIED),
    )
    columns = panel(
        "Columns",
        html.Label("x (the input you measure or set)", htmlFor=ids.X_COLUMN),
        dcc.Dropdown(id=ids.X_COLUMN, clearable=False),
        html.Label("y (the response to predict)", htmlFor=ids.Y_COLUMN),
        dcc.Dropdown(id=ids.Y_COLUMN, clearable=False),
        html.Label("weights (optional, e.g. 1/variance)", htmlFor=ids.WEIGHTS_COLUMN),
        dcc.Dropdown(id=ids.WEIGHTS_COLUMN, placeholder="none"),
        html.Label(text.WEIGHTING_LABEL, htmlFor=ids.WEIGHTING),
        dcc.Dropdown(
            id=ids.WEIGHTING,
            options=[{"label": label, "value": rule} for rule, label in fitting.WEIGHTINGS.items()],
            value="none",
            clearable=False,
        ),
        html.Label("group (optional: runs, batches, plates)", htmlFor=ids.GROUP_COLUMN),
        dcc.Dropdown(id=ids.GROUP_COLUMN, placeholder="none"),
        html.P(id=ids.COLUMN_NOTE, className="muted small"),
    )
    return [intake, columns]


# ----------------------------------------------------------------------------
# upload, paste, sheet: each stores a dataset; the page keeps only its record

UPLOAD_OUTPUT = dict(dataset=Output(ids.DATASET, "data"), notice=Output(ids.UPLOAD_NOTICE, "children"))
UPLOAD_INPUTS = dict(contents=Input(ids.UPLOAD, "contents"))
UPLOAD_STATE = dict(filename=State(ids.UPLOAD, "filename"))


def on_upload(service: FitService, contents, filename) -> dict:
    """Read an uploaded file (text or workbook, told apart by the file name) into the server's store."""
    if not contents:
        return dict(dataset=no_update, notice=no_update)
    info = service.load_upload(contents, filename)
    return dict(dataset=info.to_store(), notice=text.loaded(info.name, info.rows))


PASTE_OUTPUT = dict(
    dataset=Output(ids.DATASET, "data", allow_duplicate=True),
    notice=Output(ids.UPLOAD_NOTICE, "children", allow_duplicate=True),
)
PASTE_INPUTS = dict(n_clicks=Input(ids.PASTE_BUTTON, "n_clicks"))
PASTE_STATE = dict(pasted=State(ids.PASTE_TEXT, "value"))


def on_paste(service: FitService, n_clicks, pasted) -> dict:
    """A pasted table through the same intake as an upload, as a dataset named "pasted table"."""
    if not n_clicks:
        return dict(dataset=no_update, notice=no_update)
    info = service.load_text(pasted)
    return dict(dataset=info.to_store(), notice=text.loaded(info.name, info.rows))


SHEET_OUTPUT = PASTE_OUTPUT
SHEET_INPUTS = dict(sheet=Input(ids.SHEET, "value"))
SHEET_STATE = dict(dataset=State(ids.DATASET, "data"))


def on_sheet(service: FitService, sheet, dataset) -> dict:
    """Another sheet of the workbook on screen, read again from its bytes."""
    if not sheet or not dataset or sheet == dataset.get("sheet"):
        return dict(dataset=no_update, notice=no_update)
    info = service.load_sheet(dataset["id"], sheet)
    return dict(dataset=info.to_store(), notice=text.sheet_loaded(info.name, sheet, info.rows))


# ----------------------------------------------------------------------------
# a dataset arrives: pickers, the sheet picker, and a shared view's settings when they are for this file

DATASET_OUTPUT = dict(
    intake=Output(ids.INTAKE_REPORT, "children"),
    x_options=Output(ids.X_COLUMN, "options"),
    x=Output(ids.X_COLUMN, "value"),
    y_options=Output(ids.Y_COLUMN, "options"),
    y=Output(ids.Y_COLUMN, "value"),
    weights_options=Output(ids.WEIGHTS_COLUMN, "options"),
    weights=Output(ids.WEIGHTS_COLUMN, "value"),
    weighting=Output(ids.WEIGHTING, "value"),
    group_options=Output(ids.GROUP_COLUMN, "options"),
    group=Output(ids.GROUP_COLUMN, "value"),
    mode=Output(ids.SPLIT_MODE, "value"),
    holdout=Output(ids.HOLDOUT, "value"),
    folds=Output(ids.FOLDS, "value"),
    seed=Output(ids.SEED, "value"),
    degree=Output(ids.DEGREE, "value"),
    bands=Output(ids.BANDS, "value"),
    level=Output(ids.INTERVAL_LEVEL, "data"),
    sheet_options=Output(ids.SHEET, "options"),
    sheet=Output(ids.SHEET, "value"),
    sheet_style=Output(ids.SHEET_BOX, "style"),
    pending=Output(ids.VIEW_PENDING, "data"),
    seen=Output(ids.VIEW_COLUMNS, "data"),
    view_notice=Output(ids.VIEW_NOTICE, "children"),
    column_note=Output(ids.COLUMN_NOTE, "children"),
)
DATASET_INPUTS = dict(dataset=Input(ids.DATASET, "data"))
DATASET_STATE = dict(search=State(ids.URL, "search"), pending=State(ids.VIEW_PENDING, "data"))
DEFAULT_SETTINGS = dict(mode="holdout", holdout=25, folds=10, seed=0, degree=None, weighting="none")


def _settings_from_query(q: dict) -> dict:
    """Split settings, degree and weighting from the URL, each brought into its allowed range."""
    return dict(
        mode=q.get("mode") if q.get("mode") in SPLIT_MODES else "holdout",
        holdout=min(50, max(10, whole(q.get("holdout"), 25))),
        folds=min(50, max(2, whole(q.get("k"), 10))),
        seed=max(0, whole(q.get("seed"), 0)),
        degree=whole(q.get("degree")),
        weighting=weighting_from_query(q),
    )


def _view_source(search, pending) -> tuple[dict, str | None]:
    """The view to apply: the URL's before it was read, then the pending view (if any)."""
    if not isinstance(pending, dict):
        return {}, None
    if pending.get("unread"):
        return parse_query(search), search
    source = pending.get("search")
    return (parse_query(source), source) if source else ({}, None)


def _columns_from_query(info: DatasetInfo, q: dict) -> tuple[dict | None, list[str]]:
    """(columns, missing names): the view's x, y, weights and group when x and y are in this file."""
    numeric, cols = list(info.numeric_columns), list(info.columns)
    wanted = [q.get("x"), q.get("y")] + [q[k] for k in ("w", "g") if q.get(k)]
    missing = [c for c in wanted if c and c not in cols]
    if not (q.get("x") in numeric and q.get("y") in numeric and q.get("x") != q.get("y")):
        return None, missing or [c for c in (q.get("x"), q.get("y")) if c]
    return dict(
        x=q["x"],
        y=q["y"],
        weights=q.get("w") if q.get("w") in numeric else None,
        group=q.get("g") if q.get("g") in cols else None,
    ), missing


def _pickers(info: DatasetInfo) -> dict:
    opts = [{"label": c, "value": c} for c in info.numeric_columns]
    sheets = [{"label": s, "value": s} for s in info.sheet_names]
    return dict(
        x_options=opts,
        y_options=opts,
        weights_options=opts,
        group_options=[{"label": c, "value": c} for c in info.columns],
        sheet_options=sheets,
        sheet=info.sheet,
        sheet_style=SHOW if len(info.sheet_names) > 1 else HIDE,
    )


def _intake(service: FitService, info: DatasetInfo, cols: dict) -> list:
    """The intake report for these columns (the file's own report when they cannot be selected)."""
    try:
        sel = service.selection(info.id, Columns(cols["x"], cols["y"], cols.get("weights"), cols.get("group")))
    except DegreescopeError:
        sel = None
    return components.intake_report(info, sel)


def _apply_view(info: DatasetInfo, q: dict) -> dict:
    """Outputs for a dataset: the view's columns and settings when they fit the file, else the defaults."""
    cols, missing = _columns_from_query(info, q)
    file = q.get("file")
    notice = ""
    if cols is None:
        cols = dict(x=info.default_x, y=info.default_y, weights=None, group=None)
        settings = dict(DEFAULT_SETTINGS)
        if file and missing:
            notice = text.view_columns_missing(file, missing)
    else:
        settings = _settings_from_query(q)
        if file and q.get("sha") and info.digest and q["sha"] != info.digest:
            notice = text.view_content_differs(file)
        elif file and info.name == file and q.get("from_pending"):
            notice = text.view_restored(file)
    by_url = settings["degree"] is not None
    seen = [info.id, cols["x"], cols["y"], cols["weights"], cols["group"], settings["weighting"]] if by_url else None
    bands = bands_from_query(q) if cols is not None else None
    return dict(
        **cols,
        **settings,
        bands=DEFAULT_BANDS if bands is None else bands,
        level=level_from_query(q),
        seen=seen,
        view_notice=notice,
        column_note=_column_note(info, cols),
    )


def _column_note(info: DatasetInfo, cols: dict) -> str:
    if (cols["x"], cols["y"]) != (info.default_x, info.default_y):
        return ""
    return text.column_choice(info.default_x, info.default_y, info.choice_note)


def _other_sheet(info: DatasetInfo, q: dict) -> bool:
    """The view names this workbook and another of its sheets."""
    sheet = q.get("sheet")
    return bool(q.get("file")) and bool(sheet) and sheet != info.sheet and sheet in info.sheet_names


def on_dataset(service: FitService, dataset, search, pending=URL_UNREAD) -> dict:
    """Column pickers and intake report for a dataset; a shared view's settings when they are for this file.

    A view naming another file is kept pending (``pending``) and the page asks for that file;
    when this browser session still holds it, ``on_restore`` switches to it and nothing is asked.
    """
    info = service.info(dataset["id"]) if dataset else None
    if info is None:
        raise DegreescopeError("No dataset is loaded; upload a file.")
    q, source = _view_source(search, pending)
    if names_other_file(q, dataset):
        waiting = dict(search=source, file=q["file"])
        if service.find_loaded(q["file"], q.get("sha"), q.get("sheet")) is not None:  # on_restore brings it in
            return {name: no_update for name in DATASET_OUTPUT} | dict(pending=waiting, view_notice="")
        out = _apply_view(info, {})
        out.update(pending=waiting, view_notice=text.restore_pending(q["file"]))
    elif _other_sheet(info, q):  # the view's sheet of this workbook: on_sheet reads it, then the view applies
        waiting = dict(search=source, file=q["file"])
        pickers = _pickers(info) | dict(sheet=q["sheet"])
        return {name: no_update for name in DATASET_OUTPUT} | pickers | dict(pending=waiting, view_notice="")
    else:
        from_pending = isinstance(pending, dict) and not pending.get("unread") and bool(source)
        out = _apply_view(info, q | ({"from_pending": "1"} if from_pending else {}))
        out.update(pending=None)
    return dict(intake=_intake(service, info, out), **out, **_pickers(info))


# ----------------------------------------------------------------------------
# a shared view of a file this browser session still holds: switch to it

RESTORE_OUTPUT = dict(dataset=Output(ids.DATASET, "data", allow_duplicate=True))
RESTORE_INPUTS = dict(search=Input(ids.URL, "search"))
RESTORE_STATE = dict(dataset=State(ids.DATASET, "data"), pending=State(ids.VIEW_PENDING, "data"))


def on_restore(service: FitService, search, dataset, pending) -> dict:
    """The held dataset a shared (or pending) view names, when it is not the one on screen."""
    q, _ = _view_source(search, pending)
    if not names_other_file(q, dataset):
        return dict(dataset=no_update)
    found = service.find_loaded(q["file"], q.get("sha"), q.get("sheet"))
    if found is None or (dataset and found.id == dataset.get("id")):
        return dict(dataset=no_update)
    return dict(dataset=found.to_store())


# ----------------------------------------------------------------------------
# the URL keeps the bands and the interval level; a pending view keeps its URL
#
# The model card writes the URL (``ids.URL``, a new history entry per settled degree) from the
# settings record, which knows neither the bands nor the level. ``on_url`` works out the address
# the page should show and a clientside step puts it in place with ``history.replaceState``: no
# further history entry, so the back button still leaves the page.

URL_OUTPUT = dict(search=Output(ids.URL_WANTED, "data"))
URL_INPUTS = dict(
    search=Input(ids.URL, "search"), bands=Input(ids.BANDS, "value"), level=Input(ids.INTERVAL_LEVEL, "data")
)
URL_STATE = dict(pending=State(ids.VIEW_PENDING, "data"))
REPLACE_URL_JS = """
function(wanted) {
    if (typeof wanted === "string" && wanted.startsWith("?") && wanted !== window.location.search) {
        window.history.replaceState(window.history.state, "", window.location.pathname + wanted + window.location.hash);
    }
    return window.dash_clientside.no_update;
}
"""


def on_url(search, bands, level, pending) -> dict:
    """The address the page should show: the URL with the bands and level set; while a view waits for its
    file, the view's own URL."""
    if isinstance(pending, dict) and pending.get("unread"):
        return dict(search=no_update)
    if isinstance(pending, dict) and pending.get("search"):
        return dict(search=pending["search"] if search != pending["search"] else no_update)
    if "x" not in parse_query(search):
        return dict(search=no_update)
    new = with_view_extras(search, bands, level)
    return dict(search=new if new != search else no_update)


# ----------------------------------------------------------------------------
# the columns in use: the degree follows them, the intake report lists their rows left out

SELECTION_OUTPUT = dict(
    intake=Output(ids.INTAKE_REPORT, "children", allow_duplicate=True),
    sweep_notes=Output(ids.SWEEP_NOTES, "children", allow_duplicate=True),
    column_note=Output(ids.COLUMN_NOTE, "children", allow_duplicate=True),
)
SELECTION_INPUTS = dict(key=Input(ids.SPLIT_KEY, "data"))


def on_selection(service: FitService, key) -> dict:
    """For the charts' settings: the intake report of the columns in use, the sweep notes, the column note.

    (The degree follows the columns in ``charts.on_split``, with the figures.)
    """
    if not key:
        return {name: no_update for name in SELECTION_OUTPUT}
    ds, cols, split = from_key(key)
    view = service.split_view(ds, cols, split)
    info = service.info(ds)
    return dict(
        intake=components.intake_report(info, service.selection(ds, cols)),
        sweep_notes=[html.P(n) for n in text.labelled_sweep_notes(view)],
        column_note=_column_note(info, {"x": cols.x, "y": cols.y}),
    )


def register(app, service: FitService) -> None:
    """Wire the upload, paste, sheet, dataset, restore, URL and selection callbacks."""
    app.callback(
        output=UPLOAD_OUTPUT,
        inputs=UPLOAD_INPUTS,
        state=UPLOAD_STATE,
        prevent_initial_call=True,
        on_error=notice_on_error(UPLOAD_OUTPUT, "notice"),
    )(lambda contents, filename: on_upload(service, contents, filename))
    for handler, inputs, state in ((on_paste, PASTE_INPUTS, PASTE_STATE), (on_sheet, SHEET_INPUTS, SHEET_STATE)):
        app.callback(
            output=PASTE_OUTPUT,
            inputs=inputs,
            state=state,
            prevent_initial_call=True,
            on_error=notice_on_error(PASTE_OUTPUT, "notice"),
        )(lambda h=handler, **kw: h(service, **kw))
    app.callback(
        output=DATASET_OUTPUT,
        inputs=DATASET_INPUTS,
        state=DATASET_STATE,
        on_error=notice_on_error(DATASET_OUTPUT, "intake", components.error_paragraph),
    )(lambda dataset, search, pending: on_dataset(service, dataset, search, pending))
    _register_view(app, service)


def _register_view(app, service: FitService) -> None:
    app.callback(
        output=RESTORE_OUTPUT,
        inputs=RESTORE_INPUTS,
        state=RESTORE_STATE,
        prevent_initial_call="initial_duplicate",
        on_error=notice_on_error(RESTORE_OUTPUT, ids.VIEW_NOTICE),
    )(lambda **kw: on_restore(service, **kw))
    app.callback(
        output=URL_OUTPUT,
        inputs=URL_INPUTS,
        state=URL_STATE,
        prevent_initial_call=True,
        on_error=notice_on_error(URL_OUTPUT, ids.VIEW_NOTICE),
    )(on_url)
    app.clientside_callback(REPLACE_URL_JS, Output(ids.URL_APPLIED, "data"), Input(ids.URL_WANTED, "data"))
    app.callback(
        output=SELECTION_OUTPUT,
        inputs=SELECTION_INPUTS,
        prevent_initial_call=True,
        on_error=notice_on_error(SELECTION_OUTPUT, ids.VIEW_NOTICE),
    )(lambda **kw: on_selection(service, **kw))
