"""The validation split: holdout, ordered holdout or k-fold, the share, the folds and the seed.

The split note says how the chosen split works and, when a typed value was refused, what
was refused and what is in force instead.
"""

from __future__ import annotations

from dash import Input, Output, State, dcc, html, no_update

from .. import ids, text
from ..service import SplitSettings
from ._common import PageConfig, notice_on_error, panel, whole

SLOT = "side"


def layout(cfg: PageConfig) -> html.Section:
    """Mode, holdout share, folds, seed and the note."""
    holdout = html.Div(
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
    )
    folds = html.Div(
        [
            html.Label("Folds (k)", htmlFor=ids.FOLDS),
            # no min/max/step in the browser: a value out of range would be held back there without a word;
            # the server receives it and the split note says what was refused and what is in force
            dcc.Input(id=ids.FOLDS, type="number", step="any", value=10, debounce=True, className="num"),
        ],
        id=ids.FOLDS_BOX,
    )
    seed = html.Div(
        [
            html.Label("Seed", htmlFor=ids.SEED),
            dcc.Input(id=ids.SEED, type="number", step="any", value=0, debounce=True, className="num"),
            html.Button("Draw a new split", id=ids.NEW_SPLIT, n_clicks=0, className="btn"),
        ],
        className="seed-row",
    )
    modes = dcc.RadioItems(
        id=ids.SPLIT_MODE,
        options=[
            {"label": "Random holdout", "value": "holdout"},
            {"label": "Ordered holdout (keep back the highest x)", "value": "ordered"},
            {"label": "k-fold cross-validation", "value": "kfold"},
        ],
        value="holdout",
        className="radio",
    )
    return panel("Validation split", modes, holdout, folds, seed, html.P(id=ids.SPLIT_NOTE, className="muted small"))


MODE_OUTPUT = dict(
    holdout_style=Output(ids.HOLDOUT_BOX, "style"),
    folds_style=Output(ids.FOLDS_BOX, "style"),
    note=Output(ids.SPLIT_NOTE, "children"),
)
MODE_INPUTS = dict(
    mode=Input(ids.SPLIT_MODE, "value"),
    group=Input(ids.GROUP_COLUMN, "value"),
    holdout=Input(ids.HOLDOUT, "value"),
    folds=Input(ids.FOLDS, "value"),
    seed=Input(ids.SEED, "value"),
)
SHOW, HIDE = {"display": "block"}, {"display": "none"}


def on_mode(mode, group, holdout=25, folds=10, seed=0) -> dict:
    """Which boxes show for the mode, and the note: how the split works and any refused value."""
    _, refused = SplitSettings.coerce(mode, holdout, 10 if folds is None else folds, 0 if seed is None else seed)
    words = [text.refused_setting(r.setting.capitalize(), r.typed, r.used, r.rule) for r in refused]
    note = " ".join([text.split_note(mode, group), *words])
    if mode == "kfold":
        return dict(holdout_style=HIDE, folds_style=HIDE if group else SHOW, note=note)
    return dict(holdout_style=SHOW, folds_style=HIDE, note=note)


NEW_SPLIT_OUTPUT = dict(seed=Output(ids.SEED, "value", allow_duplicate=True))
NEW_SPLIT_INPUTS = dict(n_clicks=Input(ids.NEW_SPLIT, "n_clicks"))
NEW_SPLIT_STATE = dict(seed=State(ids.SEED, "value"))


def on_new_split(n_clicks, seed) -> dict:
    """The next seed, for a new random split."""
    if not n_clicks:
        return dict(seed=no_update)
    return dict(seed=max(0, whole(seed, 0)) + 1)


def register(app, service) -> None:
    """Wire the mode switch and the new-split button."""
    app.callback(output=MODE_OUTPUT, inputs=MODE_INPUTS, on_error=notice_on_error(MODE_OUTPUT, "note"))(on_mode)
    app.callback(
        output=NEW_SPLIT_OUTPUT,
        inputs=NEW_SPLIT_INPUTS,
        state=NEW_SPLIT_STATE,
        prevent_initial_call=True,
        on_error=notice_on_error(NEW_SPLIT_OUTPUT, ids.SPLIT_NOTE),
    )(on_new_split)
