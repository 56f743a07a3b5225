"""The evidence beside a degree, on the command line: lack of fit, added term, Mandel, influence, stability.

The engine computes everything (``fitting.degree_evidence``, ``mandel_test``, ``influence``,
``verdict_stability``, ``evidence_sentence``); this module calls it with the rows a command
fits, lines the per-degree arrays up with the sweep's degrees, and words the text output.
Each test states its source beside it:

* lack of fit against pure error: NIST/SEMATECH e-Handbook of Statistical Methods, 4.4.4.6;
* the added-term (extra sum of squares) F test;
* Mandel's fitting test: ISO 8466-1 (formula from memory in the engine), low power: a pass
  is not proof of linearity;
* influence thresholds: as the engine states them beside each flag; a flag means review,
  not remove.
"""

from __future__ import annotations

import math
from typing import Any

from .._format import fmt_number

#: above this many rows the per-row influence table is left out of the output (with the reason)
INFLUENCE_ROW_LIMIT = 10_000
DEFAULT_STABILITY_DRAWS = 200


def _p(v) -> str:
    return fmt_number(v, 3)


# ----------------------------------------------------------------------------
# fit


def _lack_of_fit(ev_mod, fit, rows, weights) -> dict[str, Any]:
    if fit.through_origin:
        return {"lack_of_fit": None, "lack_of_fit_reason": "computed for fits with a constant term only"}
    ev = ev_mod.degree_evidence(rows.x, rows.y, [fit.degree], weights=weights)
    hits = [i for i, d in enumerate(ev.degrees.tolist()) if d == fit.degree]
    f = float(ev.lack_of_fit_f[hits[0]]) if hits else float("nan")
    if not math.isfinite(f):
        reason = ev.replicates_note or "the lack-of-fit test is undefined for this degree on these data"
        return {"lack_of_fit": None, "lack_of_fit_reason": reason}
    i = hits[0]
    return {
        "lack_of_fit": {
            "f": f,
            "df_lack_of_fit": int(ev.lack_of_fit_df[i]),
            "df_pure_error": int(ev.pure_error_df),
            "p_value": float(ev.lack_of_fit_p[i]),
            "levels": int(ev.levels),
            "weighted": bool(ev.weighted),
            "source": "NIST/SEMATECH e-Handbook of Statistical Methods, section 4.4.4.6",
        },
        "lack_of_fit_reason": None,
    }


def _mandel(ev_mod, fit, rows, weights) -> dict[str, Any]:
    if fit.degree not in (1, 2) or fit.through_origin:
        return {}
    try:
        return {"mandel": ev_mod.mandel_test(rows.x, rows.y, weights=weights).to_dict()}
    except Exception as exc:  # noqa: BLE001 - a FitError from the engine: say why instead
        return {"mandel": None, "mandel_reason": str(exc)}


def _influence(ev_mod, fit, rows, weights) -> dict[str, Any]:
    if rows.x.size > INFLUENCE_ROW_LIMIT:
        why = f"the fit has {rows.x.size:,} rows; the per-row table is given up to {INFLUENCE_ROW_LIMIT:,}"
        return {"influence": None, "influence_reason": why}
    try:
        inf = ev_mod.influence(rows.x, rows.y, fit, weights=weights, lines=rows.lines)
    except Exception as exc:  # noqa: BLE001 - a FitError from the engine: say why instead
        return {"influence": None, "influence_reason": str(exc)}
    d = inf.to_dict()
    d["flagged_lines"] = [int(v) for v in inf.flagged]
    return {"influence": d}


def for_fit(fit, rows, weights=None) -> dict[str, Any]:
    """``lack_of_fit`` (or null with ``lack_of_fit_reason``), ``mandel`` at degree 1 or 2, and ``influence``."""
    import fitting as ev_mod

    out = _lack_of_fit(ev_mod, fit, rows, weights)
    out.update(_mandel(ev_mod, fit, rows, weights))
    out.update(_influence(ev_mod, fit, rows, weights))
    return out


def fit_text_lines(evaluated: dict) -> list[str]:
    """Lack of fit, Mandel's test and the influence flags in words."""
    out: list[str] = []
    if "lack_of_fit" in evaluated:
        lof = evaluated["lack_of_fit"]
        if lof:
            out.append(
                f"Lack of fit (NIST/SEMATECH e-Handbook 4.4.4.6): F = {fmt_number(lof['f'], 4)} on "
                f"({lof['df_lack_of_fit']}, {lof['df_pure_error']}) df, p = {_p(lof['p_value'])}."
            )
        else:
            out.append(f"Lack of fit: not tested ({evaluated.get('lack_of_fit_reason')}).")
    if evaluated.get("mandel"):
        m = evaluated["mandel"]
        out.append(f"Mandel's fitting test (ISO 8466-1): {m['conclusion']} {m['caution']}")
    inf = evaluated.get("influence")
    if inf:
        flagged = [r for r in inf["rows"] if r["verdict"] != "ok"]
        if flagged:
            items = "; ".join(f"line {r['line']} ({r['verdict']}: {', '.join(r['flags'])})" for r in flagged[:20])
            more = f"; and {len(flagged) - 20} more" if len(flagged) > 20 else ""
            out.append(f"Influence: {len(flagged)} of {inf['n']} rows flagged for review: {items}{more}.")
        else:
            out.append(f"Influence: no row of {inf['n']} crosses a threshold.")
        out.append(inf["caution"])
    elif evaluated.get("influence_reason"):
        out.append(f"Influence: not computed ({evaluated['influence_reason']}).")
    return ["", *out] if out else []


# ----------------------------------------------------------------------------
# sweep


def _by_degree(ev, name: str, degrees: list[int]) -> list[float | None]:
    values = dict(zip(ev.degrees.tolist(), getattr(ev, name).tolist(), strict=True))
    out = []
    for d in degrees:
        v = values.get(int(d))
        out.append(float(v) if v is not None and math.isfinite(v) else None)
    return out


def for_sweep(x, y, degrees, recommended, *, weights=None, groups=None, draws=DEFAULT_STABILITY_DRAWS, seed=0,
              folds=None, repeats="auto", replicates="auto") -> dict[str, Any]:  # fmt: skip
    """Per-degree lack of fit and added-term p-values, verdict stability and the evidence sentence."""
    import fitting as ev_mod

    degrees = [int(d) for d in degrees]
    try:
        ev = ev_mod.degree_evidence(x, y, degrees, weights=weights)
    except ev_mod.DegreescopeError as exc:  # the sweep stands; say why its evidence does not
        return {"evidence": None, "evidence_reason": str(exc)}
    out: dict[str, Any] = {
        "lack_of_fit_f": _by_degree(ev, "lack_of_fit_f", degrees),
        "lack_of_fit_p": _by_degree(ev, "lack_of_fit_p", degrees),
        "added_term_f": _by_degree(ev, "added_term_f", degrees),
        "added_term_p": _by_degree(ev, "added_term_p", degrees),
        "evidence": ev.to_dict(),
        "evidence_sentence": None,
    }
    if all(v is None for v in out["lack_of_fit_p"]):
        out["lack_of_fit_reason"] = ev.replicates_note or "the lack-of-fit test is undefined for these degrees"
    if recommended is not None and int(recommended) in ev.degrees.tolist():
        out["evidence_sentence"] = ev_mod.evidence_sentence(ev, int(recommended))
    out["verdict_stability"] = None
    if draws:
        try:
            st = ev_mod.verdict_stability(
                x, y, draws=draws, seed=seed, weights=weights, groups=groups, degrees=degrees, folds=folds,
                repeats=repeats, replicates=replicates,
            )  # fmt: skip
        except Exception as exc:  # noqa: BLE001 - a FitError from the engine: say why instead
            out["verdict_stability_reason"] = str(exc)
        else:
            d = st.to_dict()
            d["by_degree"] = {str(k): s for k, s in zip(d["degrees"], d["shares"], strict=True)}
            out["verdict_stability"] = d
    else:
        out["verdict_stability_reason"] = "skipped (--stability-draws 0)"
    return out


def sweep_text_lines(ev: dict) -> list[str]:
    out: list[str] = []
    if ev.get("evidence_sentence"):
        out.append(ev["evidence_sentence"])
    st = ev.get("verdict_stability")
    if st:
        out.append(f"Verdict stability: {st['sentence']}")
    elif ev.get("verdict_stability_reason"):
        out.append(f"Verdict stability: not computed ({ev['verdict_stability_reason']}).")
    return out
