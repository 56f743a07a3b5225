"""Wiring: every panel in ``app/panels`` registers its own callbacks on the app.

A callback's outputs and inputs sit next to its handler in the panel's module (Dash's
dictionary form); handlers are plain functions of the service and named inputs that
return named outputs, so tests call them without a browser.
"""

from __future__ import annotations

from .panels import PANELS
from .service import FitService


def register(app, service: FitService) -> None:
    """Register every panel's callbacks on ``app`` (an app instance, never the global ``dash.callback``)."""
    for module in PANELS:
        module.register(app, service)
