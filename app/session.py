"""Which browser session a request belongs to, for the dataset store's owner check.

The server's guard (``app/server.py``) gives every browser a random session id in an
HttpOnly, SameSite=Strict cookie (``secrets.token_urlsafe``) and, while it answers a
callback request, binds that id to :data:`current` here. The dataset store records the
bound id as the owner of each dataset it stores and hides a dataset from every other
session, as if its id did not exist.

Outside a bound request (start-up, tests, the command line) :func:`current` is None and
no owner check applies; a dataset stored then (the start-up sample) is shared by all.
"""

from __future__ import annotations

import re
import secrets
from collections.abc import Iterator
from contextlib import contextmanager
from contextvars import ContextVar

__all__ = ["bound", "cookie_name", "current", "is_session_id", "new_session_id"]

_current: ContextVar[str | None] = ContextVar("degreescope_session", default=None)
_ID = re.compile(r"[A-Za-z0-9_-]{32,128}")


def new_session_id() -> str:
    """A fresh random session id (43 URL-safe characters)."""
    return secrets.token_urlsafe(32)


def is_session_id(value: object) -> bool:
    """True for a string shaped like an id this module makes (anything else in the cookie is ignored)."""
    return isinstance(value, str) and _ID.fullmatch(value) is not None


def cookie_name(port: int) -> str:
    """Cookies are not kept apart by port, so two servers on one machine use different names."""
    return f"degreescope_session_{int(port)}"


def current() -> str | None:
    """The session bound to the request being answered, or None outside one."""
    return _current.get()


@contextmanager
def bound(session_id: str) -> Iterator[str]:
    """Bind ``session_id`` for the duration of the block (one request)."""
    if not is_session_id(session_id):
        raise ValueError("not a session id")
    token = _current.set(session_id)
    try:
        yield session_id
    finally:
        _current.reset(token)
