"""What every panel shares: the page settings, the section frame, the error route and a safe whole number."""

from __future__ import annotations

import logging
from dataclasses import dataclass
from typing import Callable

from dash import html, no_update, set_props

from fitting import DegreescopeError

from .. import components

log = logging.getLogger("degreescope.app")

INTERNAL_ERROR = "Something went wrong inside degreescope (internal error); the details are in the server log."


@dataclass(frozen=True)
class PageConfig:
    """Settings the panels' layouts need from the app factory."""

    upload_limit_bytes: int
    upload_max_size: int


def panel(title: str, *children, class_name: str = "", **kw) -> html.Section:
    """A titled section of the page."""
    return html.Section(
        [html.H2(title, className="panel-title"), *children], className=f"panel {class_name}".strip(), **kw
    )


def degree_marks(max_degree: int) -> dict:
    """Slider marks: every degree up to 12, every second one above."""
    step = 1 if max_degree <= 12 else 2
    return {d: str(d) for d in range(0, int(max_degree) + 1, step)}


def user_message(exc: BaseException) -> str:
    """The one sentence a user sees: the engine's own message, or a short note (the traceback goes to the log)."""
    if isinstance(exc, DegreescopeError):
        return str(exc)
    log.exception("callback failed", exc_info=exc)
    return INTERNAL_ERROR


def notice_on_error(outputs: dict, notice: str, make: Callable[[str], object] = components.error_span) -> Callable:
    """A Dash ``on_error`` handler: the message goes to the panel's notice, every other output keeps its value.

    ``notice`` names one of ``outputs`` (the usual case: a panel clears its notice on success), or,
    when the notice is not an output of the callback, a component id set with ``set_props``.
    """

    def handle(exc: Exception) -> dict | None:
        message = make(user_message(exc))
        if notice in outputs:
            return {name: message if name == notice else no_update for name in outputs}
        set_props(notice, {"children": message})
        return None  # Dash sends no_update for every output

    return handle


def whole(value, default: int | None = None) -> int | None:
    """``value`` as a whole number (truncated), or ``default`` for non-numbers, NaN and infinities."""
    try:
        v = float(value)
    except (TypeError, ValueError, OverflowError):
        return default
    return int(v) if v == v and abs(v) != float("inf") else default
