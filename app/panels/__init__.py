"""The dashboard's panels, one module each: its ``layout(cfg)`` and its ``register(app, service)``.

Each module also names its ``SLOT`` on the page ("side", "main" or "tools"), and keeps each
callback's outputs and inputs (Dash's dictionary form) next to the handler, a plain function
of the service and the named inputs that returns a dict of named outputs. A failing handler
never breaks the page: Dash's ``on_error`` puts the message in the panel's own notice
(an output of the callback, or ``set_props`` when it is not) and leaves every other output
as it was.

To add a panel: write ``app/panels/<name>.py`` with ``SLOT``, ``layout`` and ``register``, and
add it to ``PANELS`` below; its place on the page follows its slot and its order here.
"""

from __future__ import annotations

from . import caution, charts, data, degree, downloads, model, predict, split
from ._common import INTERNAL_ERROR, PageConfig, degree_marks, panel, user_message

__all__ = ["INTERNAL_ERROR", "PANELS", "PageConfig", "degree_marks", "panel", "user_message"]

PANELS = (data, split, caution, degree, charts, model, predict, downloads)

# -- evidence panel (app/panels/evidence.py) ---------------------------------------------
from . import evidence  # noqa: E402  (own block, added after the panels above)

PANELS = (*PANELS, evidence)


# -- calibration: the read-back panel beside the prediction panel, the standards panel last in the main column --
from . import readback, standards  # noqa: E402

PANELS = PANELS[: PANELS.index(predict) + 1] + (readback,) + PANELS[PANELS.index(predict) + 1 :] + (standards,)
