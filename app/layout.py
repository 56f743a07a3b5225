"""The page: a side column for data and the split, a main column for the degree and its evidence.

Every piece of text that comes from a file is passed as a plain string child (Dash
renders it as text), never as HTML or markdown.
"""

from __future__ import annotations

from dash import dcc, html

from . import ids
from .exports import CAUTION_TEXT
from .figures import empty_figure, image_options

DEGREE_MAX_START = 20


def panel(title: str, *children, class_name: str = "", **kw) -> html.Section:
    return html.Section(
        [html.H2(title, className="panel-title"), *children], className=f"panel {class_name}".strip(), **kw
    )


def degree_marks(max_degree: int) -> dict:
    step = 1 if max_degree <= 12 else 2
    return {d: str(d) for d in range(0, int(max_degree) + 1, step)}


def _chart(graph_id: str, png_id: str, svg_id: str, filename: str, height: int) -> html.Div:
    return html.Div(
        [
            dcc.Graph(
                id=graph_id,
                figure=empty_figure("Loading…"),
                config=image_options(filename),
                style={"height": f"{height}px"},
                className="chart",
            ),
            html.Div(
                [
                    html.Span("Save for slides:", className="muted"),
                    html.Button("PNG", id=png_id, n_clicks=0, className="btn btn-small", title="1600 × 900 PNG"),
                    html.Button("SVG", id=svg_id, n_clicks=0, className="btn btn-small", title="vector SVG"),
                ],
                className="chart-tools",
            ),
        ],
        className="chart-card",
    )


def build_layout(dataset_store: dict, *, upload_limit_bytes: int, upload_max_size: int) -> html.Div:
    limit_text = (
        f"{upload_limit_bytes / 2**20:.0f} MiB" if upload_limit_bytes >= 2**20 else f"{upload_limit_bytes:,} bytes"
    )
    side = html.Aside(
        [
            panel(
                "Data intake",
                html.Div(
                    dcc.Upload(
                        id=ids.UPLOAD,
                        children=html.Div(
                            [
                                html.Strong("Drop a CSV or text table here"),
                                html.Span(" or click to choose a file"),
                                html.Div(f"up to {limit_text}; stays on this server", className="muted small"),
                            ]
                        ),
                        multiple=False,
                        max_size=upload_max_size,
                        className="upload",
                        className_active="upload upload-active",
                    ),
                    id=ids.UPLOAD_BOX,
                    **{"data-limit": str(upload_limit_bytes)},
                ),
                html.Div(id=ids.UPLOAD_SIZE_WARNING, className="notice notice-error", role="status"),
                html.Div(id=ids.UPLOAD_NOTICE, className="notice", role="status"),
                html.Div(id=ids.INTAKE_REPORT, className="intake"),
            ),
            panel(
                "Columns",
                html.Label("x (the input you measure or set)", htmlFor=ids.X_COLUMN),
                dcc.Dropdown(id=ids.X_COLUMN, clearable=False),
                html.Label("y (the response to predict)", htmlFor=ids.Y_COLUMN),
                dcc.Dropdown(id=ids.Y_COLUMN, clearable=False),
                html.Label("weights (optional, e.g. 1/variance)", htmlFor=ids.WEIGHTS_COLUMN),
                dcc.Dropdown(id=ids.WEIGHTS_COLUMN, placeholder="none"),
                html.Label("group (optional: runs, batches, plates)", htmlFor=ids.GROUP_COLUMN),
                dcc.Dropdown(id=ids.GROUP_COLUMN, placeholder="none"),
            ),
            panel(
                "Validation split",
                dcc.RadioItems(
                    id=ids.SPLIT_MODE,
                    options=[
                        {"label": "Random holdout", "value": "holdout"},
                        {"label": "Ordered holdout (keep back the highest x)", "value": "ordered"},
                        {"label": "k-fold cross-validation", "value": "kfold"},
                    ],
                    value="holdout",
                    className="radio",
                ),
                html.Div(
                    [
                        html.Label("Holdout share (%)", htmlFor=ids.HOLDOUT),
                        dcc.Slider(
                            id=ids.HOLDOUT,
                            min=10,
                            max=50,
                            step=5,
                            value=25,
                            marks={v: f"{v}" for v in range(10, 51, 10)},
                            allow_direct_input=False,
                        ),
                    ],
                    id=ids.HOLDOUT_BOX,
                ),
                html.Div(
                    [
                        html.Label("Folds (k)", htmlFor=ids.FOLDS),
                        dcc.Input(
                            id=ids.FOLDS, type="number", min=2, max=50, step=1, value=10, debounce=True, className="num"
                        ),
                    ],
                    id=ids.FOLDS_BOX,
                ),
                html.Div(
                    [
                        html.Label("Seed", htmlFor=ids.SEED),
                        dcc.Input(id=ids.SEED, type="number", min=0, step=1, value=0, debounce=True, className="num"),
                        html.Button("Draw a new split", id=ids.NEW_SPLIT, n_clicks=0, className="btn"),
                    ],
                    className="seed-row",
                ),
                html.P(id=ids.SPLIT_NOTE, className="muted small"),
            ),
            html.Section(
                [html.H2("Before you rely on a curve", className="panel-title"), html.P(CAUTION_TEXT)],
                className="panel caution",
                id="caution",
            ),
        ],
        className="side",
    )

    degree_bar = html.Section(
        [
            html.Div(
                [
                    html.H2("Degree", className="panel-title"),
                    html.Span(id=ids.DEGREE_READOUT, className="readout"),
                ],
                className="degree-head",
            ),
            dcc.Slider(
                id=ids.DEGREE,
                min=0,
                max=DEGREE_MAX_START,
                step=1,
                value=None,
                marks=degree_marks(DEGREE_MAX_START),
                updatemode="mouseup",
                className="degree-slider",
            ),
            dcc.Checklist(
                id=ids.BANDS,
                options=[
                    {"label": "95 % confidence band (the mean curve)", "value": "confidence"},
                    {"label": "95 % prediction band (a new single reading)", "value": "prediction"},
                ],
                value=["confidence"],
                inline=True,
                className="bands",
            ),
        ],
        className="panel degree-panel",
    )

    verdict = html.Section(
        [
            html.Div(
                [
                    html.Div(id=ids.RECOMMENDED_DEGREE, className="rec-degree"),
                    html.P(id=ids.RECOMMENDATION_TEXT, className="rec-text"),
                    html.P(id=ids.MEASURE_NOTE, className="muted small"),
                ],
                className="verdict-main",
            ),
            html.Div(id=ids.OVERFIT_ALERT, className="alert alert-off", role="alert", **{"aria-live": "polite"}),
            html.Div(id=ids.SWEEP_NOTES, className="muted small"),
        ],
        className="panel verdict",
    )

    charts = html.Div(
        [
            _chart(ids.FIT_CHART, ids.FIT_PNG, ids.FIT_SVG, "degreescope-fit", 500),
            _chart(ids.ERROR_CHART, ids.ERROR_PNG, ids.ERROR_SVG, "degreescope-error-by-degree", 500),
        ],
        className="charts",
    )

    model = html.Div(
        [
            panel(
                "Model card",
                html.Div(id=ids.STATS),
                html.Div(
                    [
                        html.Span("Equation", className="label"),
                        html.Code(id=ids.EQUATION, className="equation"),
                        dcc.Clipboard(
                            target_id=ids.EQUATION, id=ids.EQUATION_COPY, title="copy the equation", className="copy"
                        ),
                    ],
                    className="equation-row",
                ),
                html.Div(id=ids.COEFFICIENTS, className="coef"),
                html.P(id=ids.MODEL_NOTE, className="muted small"),
                class_name="model-card",
            ),
            html.Div(
                dcc.Graph(
                    id=ids.RESIDUAL_CHART,
                    figure=empty_figure("Residuals appear here."),
                    config=image_options("degreescope-residuals"),
                    style={"height": "380px"},
                ),
                className="chart-card",
            ),
        ],
        className="model-row",
    )

    tools = html.Div(
        [
            panel(
                "Try x values",
                html.Label("x values (commas, spaces or new lines)", htmlFor=ids.PREDICT_INPUT),
                dcc.Textarea(id=ids.PREDICT_INPUT, placeholder="e.g. 450, 900, 1500", className="predict-input"),
                html.Div(id=ids.PREDICT_TABLE, className="predict-table"),
            ),
            panel(
                "Take it to the meeting",
                html.P("Downloads use the degree, columns and split on screen.", className="muted small"),
                html.Div(
                    [
                        html.Button("HTML report", id=ids.REPORT_BUTTON, n_clicks=0, className="btn"),
                        html.Button("Model JSON", id=ids.MODEL_BUTTON, n_clicks=0, className="btn"),
                        html.Button("Predictions CSV", id=ids.CSV_BUTTON, n_clicks=0, className="btn"),
                    ],
                    className="button-row",
                ),
                html.P(
                    "The CSV holds the x values typed on the left, or every data row when none are typed. "
                    "Chart images: the PNG and SVG buttons under each chart.",
                    className="muted small",
                ),
                html.Div(id=ids.EXPORT_NOTICE, className="notice", role="status"),
                dcc.Download(id=ids.DOWNLOAD),
            ),
        ],
        className="tools-row",
    )

    return html.Div(
        [
            dcc.Location(id=ids.URL, refresh=False),
            dcc.Store(id=ids.DATASET, data=dataset_store),
            dcc.Store(id=ids.SPLIT_KEY),
            dcc.Store(id=ids.DEGREE_SETTLED),
            dcc.Store(id=ids.IMAGE_DONE),
            html.Header(
                [
                    html.Div(
                        [html.Span("degree", className="brand-a"), html.Span("scope", className="brand-b")],
                        className="brand",
                    ),
                    html.P("Pick a polynomial degree you can defend, and hand over the model.", className="tagline"),
                ],
                className="topbar",
            ),
            html.Div(id=ids.FIT_NOTICE, className="notice notice-banner", role="status"),
            html.Div(
                [side, html.Main([degree_bar, verdict, charts, model, tools], className="main")],
                className="page",
            ),
            html.Footer(
                "degreescope runs on this machine. Sample data are invented for demonstration.",
                className="footer",
            ),
        ],
        className="app",
    )
