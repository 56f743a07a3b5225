"""Checks on callback requests before Dash reads them: nesting depth, value types, dataset owners.

Every ``POST .../_dash-update-component`` goes through :func:`screen_callback_request`
(installed on the Flask app by :func:`install`, called from ``app.server.build_wsgi``):

1. **Depth.** A body nested deeper than :data:`MAX_JSON_DEPTH` arrays or objects is
   refused with 400 before it is parsed (a linear scan over its brackets; strings are
   skipped). Python's JSON parser would otherwise recurse once per level.
2. **Types.** Each input and state value whose component id and property are in
   :data:`SCHEMA` must have the JSON type listed there (a whole number, a finite number,
   a string, a list of strings, a record with known key types, or null where the
   component can be empty); otherwise 400. Only the type is checked: a well-typed value
   out of range (degree 99, one fold) reaches the callback, which explains it on the
   page. Component ids the schema does not know pass through unchecked, so a panel added
   later works before it is listed here; the schema only refuses what it knows is wrong.
3. **Dataset owners.** A dataset id in a known store (``dataset.data["id"]``,
   ``split-key.data["dataset"]``) that the store does not show to this browser session
   (another session's, or evicted) is replaced by an id no dataset has, so the callback
   takes its usual "upload the file again" path and cached views of another session's
   data are never looked up by it.

Refusals are logged as one warning line without a traceback: they come from the
request, not from a fault in the program.
"""

from __future__ import annotations

import math
import re
from collections.abc import Callable, Iterator
from dataclasses import dataclass
from typing import Any

from . import ids

__all__ = [
    "GONE_ID",
    "MAX_JSON_DEPTH",
    "SCHEMA",
    "check_callback_body",
    "hide_unseen_datasets",
    "install",
    "json_too_deep",
    "screen_callback_request",
]

MAX_JSON_DEPTH = 100
GONE_ID = "gone:not-held"  # ':' never occurs in a store id (secrets.token_urlsafe)
CALLBACK_ROUTE = "/_dash-update-component"


# -- 1. depth -----------------------------------------------------------------------------

_ESCAPE = re.compile(rb"\\.", re.S)
_STRING = re.compile(rb'"[^"]*"')
_NOT_BRACKETS = bytes(b for b in range(256) if b not in b"[]{}")
_CHUNK = 1 << 22


def json_too_deep(body: bytes, limit: int = MAX_JSON_DEPTH) -> bool:
    """True when the JSON text ``body`` nests arrays and objects more than ``limit`` deep.

    Malformed text is not judged here (the parser refuses it). Cost: a few passes in C over
    the body; a body with no more than ``limit`` opening brackets returns at once.
    """
    if body.count(b"[") + body.count(b"{") <= limit:
        return False
    if b"\\" in body:
        body = _ESCAPE.sub(b"", body)
    brackets = _STRING.sub(b"", body).translate(None, _NOT_BRACKETS)
    import numpy as np

    depth = 0
    for start in range(0, len(brackets), _CHUNK):
        a = np.frombuffer(brackets, dtype=np.uint8, count=min(_CHUNK, len(brackets) - start), offset=start)
        steps = np.where((a == ord("[")) | (a == ord("{")), 1, -1).astype(np.int64)
        running = np.cumsum(steps) + depth
        if running.size and int(running.max()) > limit:
            return True
        depth = int(running[-1]) if running.size else depth
    return False


# -- 2. types -------------------------------------------------------------------------------


@dataclass(frozen=True)
class Kind:
    """A JSON type: ``test(value)`` says whether a value has it; ``name`` says it in words."""

    name: str
    test: Callable[[Any], bool]

    def problem(self, value: Any) -> str | None:
        return None if self.test(value) else f"must be {self.name}, not {_json_type(value)}"


def _is_number(v: Any) -> bool:
    return isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v)


def _is_whole(v: Any) -> bool:
    return _is_number(v) and (isinstance(v, int) or float(v).is_integer())


WHOLE = Kind("a whole number", _is_whole)
NUMBER = Kind("a finite number", _is_number)
TEXT = Kind("text", lambda v: isinstance(v, str))
TEXTS = Kind("a list of text", lambda v: isinstance(v, list) and all(isinstance(i, str) for i in v))
WHOLES = Kind("a list of whole numbers", lambda v: isinstance(v, list) and all(_is_whole(i) for i in v))


def optional(kind: Kind) -> Kind:
    return Kind(f"{kind.name} or null", lambda v: v is None or kind.test(v))


@dataclass(frozen=True)
class Record(Kind):
    """A JSON object (or null, or empty): listed keys need their kinds; ``required`` keys must be present
    in a non-empty record; other keys pass."""

    fields: tuple[tuple[str, Kind], ...] = ()
    required: frozenset[str] = frozenset()

    def problem(self, value: Any) -> str | None:
        if value is None or value == {}:
            return None
        if not isinstance(value, dict):
            return f"must be an object or null, not {_json_type(value)}"
        missing = sorted(self.required - value.keys())
        if missing:
            return f"lacks {', '.join(missing)}"
        for key, kind in self.fields:
            if key in value and not kind.test(value[key]):
                return f"[{key!r}] must be {kind.name}, not {_json_type(value[key])}"
        return None


def record(fields: dict[str, Kind], required: tuple[str, ...] = ()) -> Record:
    return Record("an object", lambda v: True, tuple(fields.items()), frozenset(required))


DATASET_RECORD = record(
    {
        "id": TEXT,
        "name": TEXT,
        "columns": TEXTS,
        "numeric": TEXTS,
        "x": optional(TEXT),
        "y": optional(TEXT),
    },
    required=("id",),
)
SPLIT_KEY_RECORD = record(
    {
        "dataset": TEXT,
        "x": TEXT,
        "y": TEXT,
        "weights": optional(TEXT),
        "group": optional(TEXT),
        "mode": TEXT,
        "holdout": NUMBER,
        "folds": WHOLE,
        "seed": WHOLE,
        "excluded": WHOLES,  # file lines the analyst left out
        "weighting": optional(TEXT),  # the named weighting; the panels check the name
    },
    required=("dataset", "x", "y", "mode", "holdout", "folds", "seed"),
)

# (component id, property) -> the kind its value must have. Ids from app/ids.py.
SCHEMA: dict[tuple[str, str], Kind] = {
    (ids.UPLOAD, "contents"): optional(TEXT),
    (ids.UPLOAD, "filename"): optional(TEXT),
    (ids.URL, "search"): optional(TEXT),
    (ids.DATASET, "data"): DATASET_RECORD,
    (ids.SPLIT_KEY, "data"): SPLIT_KEY_RECORD,
    (ids.X_COLUMN, "value"): optional(TEXT),
    (ids.Y_COLUMN, "value"): optional(TEXT),
    (ids.WEIGHTS_COLUMN, "value"): optional(TEXT),
    (ids.GROUP_COLUMN, "value"): optional(TEXT),
    (ids.SPLIT_MODE, "value"): optional(TEXT),
    (ids.HOLDOUT, "value"): optional(NUMBER),
    (ids.FOLDS, "value"): optional(WHOLE),
    (ids.SEED, "value"): optional(WHOLE),
    (ids.DEGREE, "value"): optional(WHOLE),
    (ids.DEGREE, "drag_value"): optional(WHOLE),
    (ids.DEGREE_SETTLED, "data"): optional(WHOLE),
    (ids.BANDS, "value"): optional(TEXTS),
    (ids.PREDICT_INPUT, "value"): optional(TEXT),
    **{
        (button, "n_clicks"): optional(WHOLE)
        for button in (
            ids.NEW_SPLIT,
            ids.REPORT_BUTTON,
            ids.MODEL_BUTTON,
            ids.CSV_BUTTON,
            ids.FIT_PNG,
            ids.FIT_SVG,
            ids.ERROR_PNG,
            ids.ERROR_SVG,
        )
    },
    # -- calibration: the read-back panel and the standards panel --
    (ids.READBACK_INPUT, "value"): optional(TEXT),
    (ids.READBACK_COUNT, "value"): optional(NUMBER),  # whole-number check in the panel, with a message
    (ids.READBACK_LEVEL, "value"): optional(NUMBER),
    (ids.WEIGHTING, "value"): optional(TEXT),
    (ids.TOLERANCE, "value"): optional(NUMBER),
    (ids.LOWEST_TOLERANCE, "value"): optional(NUMBER),
}

# -- evidence panel (app/panels/evidence.py) ---------------------------------------------
LEFT_OUT_ROWS = Kind(
    "a list of rows left out ({line, reason})",
    lambda v: (
        isinstance(v, list)
        and all(isinstance(r, dict) and _is_whole(r.get("line")) and isinstance(r.get("reason", ""), str) for r in v)
    ),
)
SCHEMA.update(
    {
        (ids.EXCLUSIONS, "data"): record({"dataset": TEXT, "rows": LEFT_OUT_ROWS}, required=("dataset", "rows")),
        (ids.LEAVE_OUT_LINE, "value"): optional(TEXT),
        (ids.LEAVE_OUT_REASON, "value"): optional(TEXT),
        (ids.LEAVE_OUT_BUTTON, "n_clicks"): optional(WHOLE),
        (ids.RING_FIT, "data"): record({"meta": TEXT}),
        (ids.RING_RESIDUAL, "data"): record({"meta": TEXT}),
        (ids.FIT_POINTS, "clickData"): record({"points": Kind("a list", lambda v: isinstance(v, list))}),
        (ids.STABILITY_GO, "data"): optional(WHOLE),
    }
)


# -- data panel: sheets, pasted tables, shared views ---------------------------------------------
_VIEW_COLUMNS = Kind(
    "a list of text or null",
    lambda v: v is None or (isinstance(v, list) and all(i is None or isinstance(i, str) for i in v)),
)
SCHEMA.update(
    {
        (ids.SHEET, "value"): optional(TEXT),
        (ids.PASTE_TEXT, "value"): optional(TEXT),
        (ids.PASTE_BUTTON, "n_clicks"): optional(WHOLE),
        (ids.VIEW_PENDING, "data"): record({"search": optional(TEXT), "file": optional(TEXT)}),
        (ids.VIEW_COLUMNS, "data"): _VIEW_COLUMNS,
        (ids.INTERVAL_LEVEL, "data"): optional(NUMBER),
    }
)


def _json_type(v: Any) -> str:
    if v is None:
        return "null"
    if isinstance(v, bool):
        return "true/false"
    if isinstance(v, (int, float)):
        return "a number" if math.isfinite(v) else "a non-finite number"
    return {str: "text", list: "a list", dict: "an object"}.get(type(v), type(v).__name__)


def _entries(body: Any) -> Iterator[dict]:
    """Every ``{"id", "property", "value"}`` entry of the inputs and state (wildcard groups opened)."""
    if not isinstance(body, dict):
        return
    for part in ("inputs", "state"):
        items = body.get(part)
        if not isinstance(items, list):
            continue
        for item in items:
            for entry in item if isinstance(item, list) else [item]:
                if (
                    isinstance(entry, dict)
                    and isinstance(entry.get("id"), str)
                    and isinstance(entry.get("property"), str)
                ):
                    yield entry


def _is_entry(entry: Any) -> bool:
    return isinstance(entry, dict) and isinstance(entry.get("id"), str) and isinstance(entry.get("property"), str)


def check_callback_body(body: Any) -> str | None:
    """The first value in ``body`` (a parsed callback request) of the wrong type, in words; None if none."""
    for entry in _entries(body):
        kind = SCHEMA.get((entry["id"], entry["property"]))
        if kind is None:
            continue
        problem = kind.problem(entry.get("value"))
        if problem:
            return f"{entry['id']}.{entry['property']} {problem}"
    return None


# -- 3. dataset owners ---------------------------------------------------------------------

_DATASET_REFERENCES = {(ids.DATASET, "data"): "id", (ids.SPLIT_KEY, "data"): "dataset"}


def hide_unseen_datasets(body: Any, visible: Callable[[str], bool]) -> int:
    """Replace (in place) each dataset id in ``body`` for which ``visible(id)`` is false by :data:`GONE_ID`.

    Returns how many were replaced. Run after :func:`check_callback_body`.
    """
    replaced = 0
    for entry in _entries(body):
        field_name = _DATASET_REFERENCES.get((entry["id"], entry["property"]))
        value = entry.get("value")
        if field_name is None or not isinstance(value, dict):
            continue
        ref = value.get(field_name)
        if isinstance(ref, str) and ref and ref != GONE_ID and not visible(ref):
            value[field_name] = GONE_ID
            replaced += 1
    return replaced


# -- wiring ------------------------------------------------------------------------------------


def _refuse(text: str):
    return text, 400, {"Content-Type": "text/plain; charset=utf-8"}


def screen_callback_request(flask_app: Any, store: Any = None):
    """Flask ``before_request`` body: None lets the request through, anything else is the answer."""
    from flask import request

    if request.method != "POST" or not request.path.endswith(CALLBACK_ROUTE):
        return None
    raw = request.get_data(cache=True)
    if json_too_deep(raw):
        flask_app.logger.warning("refused a callback request nested deeper than %d levels", MAX_JSON_DEPTH)
        return _refuse(f"This request is nested deeper than {MAX_JSON_DEPTH} levels.\n")
    try:
        body = request.get_json(silent=True)
    except RecursionError:  # the scan above should make this unreachable
        flask_app.logger.warning("refused a callback request: nested too deeply to parse")
        return _refuse(f"This request is nested deeper than {MAX_JSON_DEPTH} levels.\n")
    if body is None:
        return None  # not JSON: Dash's own parsing answers it (400)
    problem = check_callback_body(body)
    if problem:
        flask_app.logger.warning("refused a callback request: %s", problem)
        return _refuse(f"A value in this request has the wrong type: {problem}.\n")
    if store is not None:
        hide_unseen_datasets(body, store.__contains__)
    return None


def install(flask_app: Any, store: Any = None) -> None:
    """Run :func:`screen_callback_request` before every request of ``flask_app`` (once per app)."""
    if flask_app.extensions.get("degreescope_edge"):
        return
    flask_app.extensions["degreescope_edge"] = True
    flask_app.before_request(lambda: screen_callback_request(flask_app, store))
