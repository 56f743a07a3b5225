"""Every sentence, caption and label the dashboard shows, next to the caution text.

The service (``app/service.py``) returns numbers; this module turns them into words, and
``app/_format.py`` turns each number into text ("—" when missing, "value ± SE").
Nothing here computes a statistic.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from ._format import fmt_count, fmt_number, fmt_pm, fmt_r2

if TYPE_CHECKING:
    from .service import DegreeView, ModelView, SplitView

CAUTION_TEXT = (
    "Polynomial fits are unreliable outside the range of the data they were fitted on. "
    "A calibration used for safety-, health- or legally relevant measurement must follow the applicable "
    "standards and local procedures; this tool does not replace them."
)

ECHO_CHARS = 40  # user text echoed in a message is cut to this many characters


def echo(text: object, limit: int = ECHO_CHARS) -> str:
    """User text for a message, quoted, cut to ``limit`` characters with an ellipsis."""
    s = str(text)
    return repr(s if len(s) <= limit else s[: limit - 1] + "…")


# ----------------------------------------------------------------------------
# labels


def axis_label(name: str, unit: str | None) -> str:
    """ "name (unit)", unless the name already carries the unit."""
    name = str(name)
    return f"{name} ({unit})" if unit and unit not in name else name


def term_name(power: int) -> str:
    """The power-basis term: "1", "x", "x^2", ..."""
    return "1" if power == 0 else ("x" if power == 1 else f"x^{power}")


def coefficient_unit(x_unit: str | None, y_unit: str | None, power: int) -> str:
    """Unit of the coefficient of x^power: y's unit over x's unit to that power ("" when neither is known)."""
    if not y_unit and not x_unit:
        return ""
    yu = y_unit or "1"
    if power == 0 or not x_unit:
        return yu
    return f"{yu}/{x_unit}" if power == 1 else f"{yu}/{x_unit}^{power}"


def verdict_label(scheme: str, group: str | None, n_groups: int) -> str:
    """What the recommendation rests on: the verdict sweep's scheme, or the grouped folds."""
    if group is not None:
        return f"grouped folds by {group!r} ({n_groups} groups)"
    return scheme


# ----------------------------------------------------------------------------
# the degree on screen


def held_out_name(mode: str) -> str:
    return "CV test" if mode == "kfold" else "test"


def degree_caption(view: SplitView, dv: DegreeView) -> tuple[str, str]:
    """Two lines under both charts: the numbers at this degree, then the split."""
    name = held_out_name(view.split.mode)
    return (
        f"Degree {dv.degree} · {name} RMSE {fmt_pm(dv.test_rmse, dv.test_rmse_se)}"
        f" · R² train {fmt_r2(dv.train_r2, 5)}, {name} {fmt_r2(dv.test_r2, 5)}",
        f"Split: {view.split_label} · {fmt_count(view.rows_used)} rows",
    )


def degree_readout(dv: DegreeView) -> str:
    """The short readout beside the degree slider."""
    return f"degree {dv.degree} · test RMSE {fmt_pm(dv.test_rmse, dv.test_rmse_se)}"


def recommended(view: SplitView) -> str:
    return f"Recommended degree: {view.steady.recommended_degree}"


def measure_note(view: SplitView) -> str:
    """What the recommendation and the overfitting warning rest on, and what the charts show."""
    return (
        f"The recommendation and the overfitting warning rest on {view.steady_label} of all "
        f"{fmt_count(view.rows_used)} rows ({view.steady.recommendation_rule} rule), whatever split the charts "
        f"show. The charts show the {view.split_label}."
    )


def sweep_notes(view: SplitView) -> list[str]:
    """The sweeps' own notes (each once) and the rows the column choice left out."""
    notes = list(view.sweep.warnings) + [w for w in view.steady.warnings if w not in view.sweep.warnings]
    if view.rows_dropped:
        notes.append(f"{fmt_count(view.rows_dropped)} rows were left out with these columns (see the intake report).")
    return notes


# ----------------------------------------------------------------------------
# the split


def split_note(mode: str, group: str | None) -> str:
    if mode == "kfold":
        if group:
            return f"Grouped folds: each value of {group!r} is held out in turn; k is not used."
        return "Each fold is held out in turn; error bars show the standard error across folds."
    if mode == "ordered":
        return "The highest x values are held out, to see how each degree extrapolates."
    return "A random share of the rows is held out; draw a new split to see how much the verdict moves."


def refused_setting(what: str, typed: object, used: object, rule: str) -> str:
    """One sentence for a split setting the page refused: what was typed, the rule, what is in force."""
    return f"{what} {echo(typed)} was not used ({rule}); {used} is in force."


# ----------------------------------------------------------------------------
# the model


def fitted_on(model: ModelView) -> str:
    """Which rows the precise fit used."""
    n = fmt_count(model.fit.n)
    if model.every_row:
        return f"every one of the {n} rows"
    return f"the {n} training rows of the {model.split_label} (switch to k-fold to fit every row)"


def fitted_rows(model: ModelView) -> str:
    n = fmt_count(model.fit.n)
    return f"all {n} rows" if model.every_row else f"the {n} training rows"


def model_note(model: ModelView) -> str:
    """The sentence under the model card: rows, basis, the t quantile and the valid x range."""
    f = model.fit
    note = (
        f"Fitted on {fitted_on(model)}. Power basis in the original units; 95 % intervals use Student's t with "
        f"{f.dof} degrees of freedom (t = {fmt_number(model.t_quantile, 5)}). Valid x range: "
        f"{fmt_number(f.domain[0], 6)} to {fmt_number(f.domain[1], 6)}."
    )
    return " ".join([note, *f.warnings])


def residual_caption(model: ModelView) -> tuple[str, str]:
    return (
        "y − fitted value" + ("; a random sample of the points is shown." if model.residual_sampled else "."),
        f"The fit used {fitted_rows(model)}.",
    )


# ----------------------------------------------------------------------------
# data and predictions


def loaded(name: str, rows: int) -> str:
    return f"Loaded {name}: {fmt_count(rows)} rows."


def units_line(units: dict[str, str]) -> str:
    return "Units from the headers: " + "; ".join(f"{c} → {u}" for c, u in units.items())


def outside_flag(outside: bool) -> str:
    return "outside the data range: extrapolation" if outside else ""


def predictions_shown(shown: int, total: int) -> str:
    return f"Showing the first {shown} of {total} predictions; the predictions CSV holds all of them."


def sample_note(shown: int, rows: int) -> str:
    return f"showing a random sample of {fmt_count(shown)} of {fmt_count(rows)} points; fits use every row"
