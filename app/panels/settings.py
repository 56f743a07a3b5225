"""The settings the charts on screen were drawn for, as kept in the page's ``dcc.Store`` and in the URL.

A shared URL names the file besides the settings: ``file`` (its name), ``sha`` (the first 12
hex digits of its SHA-256) and, for a workbook, ``sheet``; then the columns, the split, the
degree, the named weighting (``wt``, when not "none"), the bands shown (``bands``) and the
interval level in per cent (``level``). A page
opened on a URL whose file is not loaded keeps the settings pending until a file of that
name is loaded (``app/panels/data.py``, ``on_dataset``).
"""

from __future__ import annotations

from urllib.parse import parse_qs, urlencode

from fitting import DegreescopeError

from ..service import Columns, SplitSettings, check_weighting_choice


def split_key(dataset, x, y, weights, group, mode, holdout, folds, seed, excluded=(), weighting=None) -> dict:
    """The store record of the chart settings; refused split values are replaced by the ones in force.

    ``weighting``: the page's named weighting (empty: "none"); an unknown one is refused (FitError).
    """
    rule = check_weighting_choice(weighting)
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
        "file": dataset.get("name"),
        "sha": dataset.get("sha") or None,
        "sheet": dataset.get("sheet") or None,
        "excluded": sorted(int(v) for v in excluded),
        "weighting": rule,
    }


def from_key(key: dict) -> tuple[str, Columns, SplitSettings]:
    """(dataset id, columns, split) from a store record made by ``split_key``."""
    if not key:
        raise DegreescopeError("The charts are not ready yet; wait a moment or upload a file.")
    cols = Columns(
        key["x"],
        key["y"],
        key.get("weights"),
        key.get("group"),
        tuple(key.get("excluded") or ()),
        check_weighting_choice(key.get("weighting")),
    )
    split = SplitSettings(
        mode=key["mode"], holdout=float(key["holdout"]), folds=int(key["folds"]), seed=int(key["seed"])
    )
    return key["dataset"], cols, split


def url_query(key: dict, degree, out: str | None = None) -> str:
    """The URL query that restores these settings and this degree."""
    q = {k: key[k] for k in ("file", "sha", "sheet") if key.get(k)}
    q.update(x=key["x"], y=key["y"])
    if key.get("weights"):
        q["w"] = key["weights"]
    if key.get("group"):
        q["g"] = key["group"]
    if key.get("weighting") and key["weighting"] != "none":
        q["wt"] = key["weighting"]
    q.update(
        mode=key["mode"], holdout=f"{round(float(key['holdout']) * 100)}", k=str(key["folds"]), seed=str(key["seed"])
    )
    if degree is not None:
        q["degree"] = str(int(degree))
    if out:
        q["out"] = out
    return "?" + urlencode(q)


def parse_query(search: str | None) -> dict:
    """The first value of each parameter of a URL query."""
    if not search:
        return {}
    raw = parse_qs(search.lstrip("?"), keep_blank_values=False)
    return {k: v[0] for k, v in raw.items() if v}


BAND_NAMES = ("confidence", "prediction")
DEFAULT_BANDS = ["confidence"]
DEFAULT_LEVEL = 95
LEVEL_RANGE = (50, 99.9)  # per cent


def weighting_from_query(q: dict) -> str:
    """The named weighting from the URL (``wt``): a rule of ``fitting.WEIGHTINGS``, else "none"."""
    try:
        return check_weighting_choice(q.get("wt"))
    except DegreescopeError:
        return "none"


def level_fraction(level) -> float:
    """The page's interval level (``ids.INTERVAL_LEVEL``, in per cent) as a fraction; 0.95 when empty or
    outside LEVEL_RANGE."""
    try:
        v = float(level)
    except (TypeError, ValueError):
        return DEFAULT_LEVEL / 100
    return v / 100 if LEVEL_RANGE[0] <= v <= LEVEL_RANGE[1] else DEFAULT_LEVEL / 100


def bands_from_query(q: dict) -> list[str] | None:
    """The bands named in the URL ("confidence,prediction", or "none"); None when the URL names none."""
    raw = q.get("bands")
    if raw is None:
        return None
    return [b for b in BAND_NAMES if b in raw.split(",")]


def level_from_query(q: dict) -> float:
    """The interval level in per cent from the URL, DEFAULT_LEVEL when missing or outside LEVEL_RANGE."""
    try:
        v = float(q.get("level", DEFAULT_LEVEL))
    except (TypeError, ValueError):
        return DEFAULT_LEVEL
    return v if LEVEL_RANGE[0] <= v <= LEVEL_RANGE[1] else DEFAULT_LEVEL


def _level_text(level) -> str:
    try:
        v = float(level)
    except (TypeError, ValueError):
        return str(DEFAULT_LEVEL)
    return f"{v:g}" if LEVEL_RANGE[0] <= v <= LEVEL_RANGE[1] else str(DEFAULT_LEVEL)


def with_view_extras(search: str | None, bands, level) -> str:
    """``search`` with the bands shown and the interval level set (the other parameters kept, in order)."""
    q = parse_query(search)
    q["bands"] = ",".join(b for b in BAND_NAMES if b in (bands or [])) or "none"
    q["level"] = _level_text(DEFAULT_LEVEL if level is None else level)
    return "?" + urlencode(q)


def names_other_file(q: dict, dataset: dict | None) -> bool:
    """True when the URL names a file (``file=``) other than the dataset's (by name)."""
    file = q.get("file")
    return bool(file) and (not dataset or dataset.get("name") != file)
