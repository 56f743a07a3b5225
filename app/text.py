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


# ----------------------------------------------------------------------------
# evidence panel (app/panels/evidence.py): the evidence for a degree, influence, rows left out

EVIDENCE_TITLE = "Evidence for the degree"
LEFT_OUT_REASON = "left out by the analyst"
COMPUTING = "computing… (200 redraws of the folds)"
INFLUENCE_VERDICT_WORDS = {
    "review": "review",
    "outlier?": "large residual: review",
    "influential?": "influential: review",
}
INFLUENCE_FLAG_NAMES = {
    "leverage": "leverage",
    "studentized_residual": "studentized residual",
    "cooks_distance": "Cook's distance",
    "dffits": "DFFITS",
}
LEAVE_OUT_HELP = (
    "Leave a row out on purpose: type its line number in the file (or click a point on the fit chart), "
    "say why, and press the button. The input file is never changed; each row can be put back."
)


def evidence_rule(rule: str, levels_held_out: bool) -> str:
    """How the recommended degree is chosen, in the verdict sweep's own words."""
    out = f"How the recommended degree is chosen: {rule}"
    if levels_held_out:
        out += (
            " x has replicates, so the verdict's folds hold out whole x levels: the readings of one level are never "
            "split between training and test."
        )
    return out


def evidence_rows(rows_used: int, left_out: int, recommended: int) -> str:
    """The rows the evidence and the verdict rest on."""
    base = f"Recommended degree {recommended}, from {fmt_count(rows_used)} rows"
    if left_out:
        return base + f" ({fmt_count(left_out)} {'row' if left_out == 1 else 'rows'} {LEFT_OUT_REASON})."
    return base + "."


def lack_of_fit_absent(note: str | None) -> str:
    """Why the table has no lack-of-fit columns."""
    why = note or "no x level has replicates"
    return f"No lack-of-fit test here: {why}. The added-term test and the information criteria remain."


def criteria_note(criteria: str) -> str:
    return (
        f"ΔAIC and ΔBIC are differences from the lowest value in the table; lower is better ({criteria}). "
        "Added-term p: the test of each degree's highest term against the degree below (extra sum of squares)."
    )


def p_value(p) -> str:
    """A p-value: "< 0.001" below 0.001, else two significant digits; "—" when missing."""
    s = fmt_number(p, 2)
    return s if s == "—" or float(p) >= 0.001 else "< 0.001"


def mandel_heading(shown: int) -> str:
    return f"Mandel's fitting test (ISO 8466-1), shown because degree {shown} is on screen"


def mandel_missing(problem: str) -> str:
    return f"Mandel's test cannot be made: {problem}"


def stability_axis() -> tuple[str, str]:
    return "recommended degree", "share of redraws (%)"


def stability_line(sentence: str, held_out: str, folds: int) -> str:
    return f"The verdict gives {sentence} ({folds} folds holding out {held_out})."


def influence_heading(degree: int, n: int) -> str:
    return f"Single rows with a large say in the degree-{degree} fit of all {fmt_count(n)} rows in use"


def no_flags(degree: int) -> str:
    return f"No row is flagged at degree {degree}."


def threshold_line(name: str, rule: str, value, source: str) -> str:
    return f"{name}: {rule} = {fmt_number(value, 4)}. Source: {source}."


def ring_hover() -> str:
    return (
        "line %{customdata[0]}<br>x %{customdata[1]:.6g}<br>y %{customdata[2]:.6g}<br>leverage %{customdata[3]:.3g}"
        "<br>studentized residual %{customdata[4]:.3g}<br>Cook's distance %{customdata[5]:.3g}"
        "<br>%{customdata[6]}<extra>flagged</extra>"
    )


def ring_name() -> str:
    return "flagged rows (review)"


def left_out_item(line: int, reason: str) -> str:
    return f"line {line}: {reason}" if reason else f"line {line} (no reason given)"


def no_left_out() -> str:
    return "No row is left out: every usable row is fitted."


def left_out_note(count: int) -> str:
    return (
        f"{fmt_count(count)} {'row is' if count == 1 else 'rows are'} {LEFT_OUT_REASON}; the evidence, influence and "
        "verdict stability above use the remaining rows, and the input file is unchanged."
    )


def left_out_done(line: int) -> str:
    return f"Line {line} is left out, with its reason on record."


def put_back_done(line: int) -> str:
    return f"Line {line} is back in."


def not_a_line(value) -> str:
    return f"{echo(value)} is not a line number; type the whole number of a data line in the file, such as 12."


def not_a_row(line: int) -> str:
    return (
        f"Line {line} is not a data row fitted with these columns (a header, a comment, a row left out at intake, "
        "or past the end of the file); type a line number from the influence table or the file."
    )


def already_left_out(line: int) -> str:
    return f"Line {line} is already left out; put it back from the list below first."


def too_many_left_out(limit: int) -> str:
    return f"At most {limit} rows can be left out here; put some back or edit a copy of the file."


def too_few_left(rows: int, needed: int) -> str:
    return f"Only {rows} rows would remain; a fit needs at least {needed}. Put a row back first."
