"""The caution that stays on screen: fits are unreliable outside their data, and local codes rule."""

from __future__ import annotations

from dash import html

from .. import text
from ._common import PageConfig

SLOT = "side"


def layout(cfg: PageConfig) -> html.Section:
    """The caution panel."""
    return html.Section(
        [html.H2("Before you rely on a curve", className="panel-title"), html.P(text.CAUTION_TEXT)],
        className="panel caution",
        id="caution",
    )


def register(app, service) -> None:
    """No callbacks: the text does not change."""
