"""The settings the charts on screen were drawn for, as kept in the page's ``dcc.Store`` and in the URL."""

from __future__ import annotations

from urllib.parse import parse_qs, urlencode

from fitting import DegreescopeError

from ..service import Columns, SplitSettings


def split_key(dataset, x, y, weights, group, mode, holdout, folds, seed) -> dict:
    """The store record of the chart settings; refused split values are replaced by the ones in force."""
    s, _refused = SplitSettings.coerce(mode, holdout, 10 if folds is None else folds, 0 if seed is None else seed)
    if not dataset or not dataset.get("id"):
        raise DegreescopeError("No dataset is loaded; upload a file.")
    if not x or not y:
        raise DegreescopeError("Choose an x and a y column.")
    return {
        "dataset": dataset["id"],
        "decimal": dataset.get("decimal", "."),
        "x": x,
        "y": y,
        "weights": weights or None,
        "group": group or None,
        "mode": s.mode,
        "holdout": s.holdout,
        "folds": s.folds,
        "seed": s.seed,
    }


def from_key(key: dict) -> tuple[str, Columns, SplitSettings]:
    """(dataset id, columns, split) from a store record made by ``split_key``."""
    if not key:
        raise DegreescopeError("The charts are not ready yet; wait a moment or upload a file.")
    cols = Columns(key["x"], key["y"], key.get("weights"), key.get("group"))
    split = SplitSettings(
        mode=key["mode"], holdout=float(key["holdout"]), folds=int(key["folds"]), seed=int(key["seed"])
    )
    return key["dataset"], cols, split


def url_query(key: dict, degree) -> str:
    """The URL query that restores these settings and this degree."""
    q = {"x": key["x"], "y": key["y"]}
    if key.get("weights"):
        q["w"] = key["weights"]
    if key.get("group"):
        q["g"] = key["group"]
    q.update(
        mode=key["mode"], holdout=f"{round(float(key['holdout']) * 100)}", k=str(key["folds"]), seed=str(key["seed"])
    )
    if degree is not None:
        q["degree"] = str(int(degree))
    return "?" + urlencode(q)


def parse_query(search: str | None) -> dict:
    """The first value of each parameter of a URL query."""
    if not search:
        return {}
    raw = parse_qs(search.lstrip("?"), keep_blank_values=False)
    return {k: v[0] for k, v in raw.items() if v}
