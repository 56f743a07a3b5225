"""The page: a side column for data and the split, a main column for the degree and its evidence.

Each panel builds its own part (``app/panels``); this module only places them by their slot.
Every piece of text that comes from a file is passed as a plain string child (Dash renders
it as text), never as HTML or markdown.
"""

from __future__ import annotations

from dash import dcc, html

from . import ids
from .panels import PANELS, PageConfig


def _parts(slot: str, cfg: PageConfig) -> list:
    out: list = []
    for module in PANELS:
        if slot == module.SLOT:
            part = module.layout(cfg)
            out.extend(part if isinstance(part, list) else [part])
    return out


def _stores(dataset_store: dict) -> list:
    return [
        dcc.Location(id=ids.URL, refresh=False),
        dcc.Store(id=ids.DATASET, data=dataset_store),
        dcc.Store(id=ids.SPLIT_KEY),
        dcc.Store(id=ids.DEGREE_SETTLED),
        dcc.Store(id=ids.IMAGE_DONE),
    ]


def _top_bar() -> html.Header:
    brand = html.Div(
        [html.Span("degree", className="brand-a"), html.Span("scope", className="brand-b")], className="brand"
    )
    tagline = html.P("Pick a polynomial degree you can defend, and hand over the model.", className="tagline")
    return html.Header([brand, tagline], className="topbar")


def build_layout(dataset_store: dict, *, upload_limit_bytes: int, upload_max_size: int) -> html.Div:
    """The whole page for one visit; ``dataset_store`` is the start-up dataset's record."""
    cfg = PageConfig(upload_limit_bytes=upload_limit_bytes, upload_max_size=upload_max_size)
    side = html.Aside(_parts("side", cfg), className="side")
    tools = html.Div(_parts("tools", cfg), className="tools-row")
    main = html.Main([*_parts("main", cfg), tools], className="main")
    footer = html.Footer(
        "degreescope runs on this machine. Sample data are invented for demonstration.", className="footer"
    )
    return html.Div(
        [
            *_stores(dataset_store),
            _top_bar(),
            html.Div(id=ids.FIT_NOTICE, className="notice notice-banner", role="status"),
            html.Div([side, main], className="page"),
            footer,
        ],
        className="app",
    )
