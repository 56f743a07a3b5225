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


def weighting_name(rule: str) -> str:
    """A named weighting as written on screen: "1/x2" -> "1/x²"."""
    return str(rule).replace("2", "²")


def weighting_in_force(columns) -> str:
    """Which weighting the fits use, short: "weighting 1/x²", "weights column 'w'", or "" for none."""
    if columns.weights is not None:
        return f"weights column {columns.weights!r}"
    rule = getattr(columns, "weighting", "none")
    return "" if rule == "none" else f"weighting {weighting_name(rule)}"


def degree_caption(view: SplitView, dv: DegreeView) -> tuple[str, str]:
    """Two lines under both charts: the numbers at this degree, then the split (and a weighting in force)."""
    name = held_out_name(view.split.mode)
    used = weighting_in_force(view.columns)
    weighted = "weighted " if used else ""
    rule = f" · {used}" if used and view.columns.weights is None else ""
    return (
        f"Degree {dv.degree} · {weighted}{name} RMSE {fmt_pm(dv.test_rmse, dv.test_rmse_se)}"
        f" · R² train {fmt_r2(dv.train_r2, 5)}, {name} {fmt_r2(dv.test_r2, 5)}",
        f"Split: {view.split_label} · {fmt_count(view.rows_used)} rows{rule}",
    )


def degree_readout(dv: DegreeView) -> str:
    """The short readout beside the degree slider."""
    return f"degree {dv.degree} · test RMSE {fmt_pm(dv.test_rmse, dv.test_rmse_se)}"


def recommended(view: SplitView) -> str:
    return f"Recommended degree: {view.steady.recommended_degree}"


def measure_note(view: SplitView) -> str:
    """What the recommendation and the overfitting warning rest on, and what the charts show."""
    used = weighting_in_force(view.columns)
    weighted = f" Every fit and error on this page is weighted ({used})." if used else ""
    return (
        f"The recommendation and the overfitting warning rest on {view.steady_label.rstrip('.')} "
        f"({view.steady.recommendation_rule} rule), on all {fmt_count(view.rows_used)} rows, whatever split the "
        f"charts show. The charts show the {view.split_label}.{weighted}"
    )


def sweep_notes(view: SplitView) -> list[str]:
    """The sweeps' own notes (each once) and the rows the column choice left out."""
    notes = list(view.sweep.warnings) + [w for w in view.steady.warnings if w not in view.sweep.warnings]
    if view.rows_dropped:
        notes.append(rows_dropped_note(view.rows_dropped))
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
        f"Fitted on {fitted_on(model)}. Power basis in the original units; {level_text(model.level)} intervals "
        "use Student's t with "
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


# ----------------------------------------------------------------------------
# data panel: rows left out, the column choice, shared views, sheets and pasted tables

LINES_SHOWN = 12  # line numbers listed per reason before the rest is counted


def lines_list(lines, count: int) -> str:
    """ "line 9" / "lines 9, 14, 27, 28" / "lines 9, 14, … and 40 more (52 in all)"."""
    lines = [int(v) for v in lines]
    if not lines:
        return f"{fmt_count(count)} rows (line numbers not recorded)"
    shown = lines[:LINES_SHOWN]
    head = ("line " if count == 1 else "lines ") + ", ".join(str(v) for v in shown)
    rest = int(count) - len(shown)
    return head if rest <= 0 else f"{head} and {fmt_count(rest)} more ({fmt_count(count)} in all)"


def dropped_line(reason: str, count: int, lines) -> str:
    """One intake-report line for one reason rows were left out, with their line numbers."""
    return f"{reason[:1].upper()}{reason[1:]} ({row_count(count)}): {lines_list(lines, count)}."


def rows_left_out_head(x: str, y: str, total: int) -> str:
    if not total:
        return f"Every row has usable values of x {echo(x)} and y {echo(y)}."
    verb = "is" if total == 1 else "are"
    return f"With x {echo(x)} and y {echo(y)}, {row_count(total)} {verb} left out:"


def row_count(n: int) -> str:
    """'1 row', '2 rows', '12,000 rows'."""
    return "1 row" if n == 1 else f"{fmt_count(n)} rows"


def rows_dropped_note(n: int) -> str:
    """The sweeps' note on rows the column choice left out."""
    verb = "was" if n == 1 else "were"
    return f"{row_count(n)} {verb} left out with these columns (see the intake report)."


def column_choice(x: str, y: str, engine_note: str | None) -> str:
    """Why the default columns were picked."""
    if engine_note:
        return engine_note
    return (
        f"Picked x {echo(x)} and y {echo(y)}: the first two numeric columns, none of them a small-integer "
        "counter. Choose others above if that is wrong."
    )


def restore_pending(file: str) -> str:
    return (
        f"This link shows a view of {echo(file)}: load {echo(file)} to restore this view. Its columns, split, "
        "degree and bands are kept until then; meanwhile the page shows another file."
    )


def view_columns_missing(file: str, missing: list[str]) -> str:
    names = ", ".join(echo(m) for m in missing)
    return (
        f"The shared view of {echo(file)} uses columns this file does not have ({names}); "
        "the default columns are shown instead."
    )


def view_content_differs(file: str) -> str:
    return (
        f"This {echo(file)} differs in content from the file the link was made with; "
        "the view's settings are applied, but the numbers may differ."
    )


def view_restored(file: str) -> str:
    return f"Restored the shared view of {echo(file)}."


def sheet_loaded(file: str, sheet: str, rows: int) -> str:
    return f"Read sheet {echo(sheet)} of {echo(file)}: {fmt_count(rows)} rows."


def _is_degree_cap(note: str) -> bool:
    return note.startswith("Degrees ") and "were left out" in note


def labelled_sweep_notes(view: SplitView) -> list[str]:
    """The sweeps' notes, each labelled with the sweep it belongs to, each once.

    A note on degrees left out for too few distinct x values is shown once, for the charts'
    split (the slider's range follows it), not also for the recommendation's sweep.
    """
    chart = f"Charts' split, {view.split_label}"
    verdict = f"Recommendation's sweep, {view.steady_label}"
    notes = [f"{chart}: {w}" for w in view.sweep.warnings]
    capped = any(_is_degree_cap(w) for w in view.sweep.warnings)
    for w in view.steady.warnings:
        if w in view.sweep.warnings or (capped and _is_degree_cap(w)):
            continue
        notes.append(f"{verdict}: {w}")
    if view.rows_dropped:
        notes.append(rows_dropped_note(view.rows_dropped))
    return notes


# model card, predictions and downloads (the hand-over model; app/panels/model.py,
# predict.py, downloads.py and app/views_model.py)

R2_DIGITS = 5  # R² on the model card, as in the chart captions: one figure, one value
RMSE_DIGITS = 4  # held-out RMSE on the model card, as in the chart captions


def handover_line(model: ModelView) -> str:
    """The model card's one line on which rows the model a user takes away was fitted on."""
    return (
        f"This model is fitted on every usable row ({fmt_count(model.fit.n)} rows), whatever split the charts "
        "show; the split only judges the degree. The card, the model JSON, the predictions CSV and the report "
        "all describe this fit."
    )


def rmse_label(weighted: bool) -> str:
    """The RMSE row's name: a weighted RMSE says so."""
    return "weighted RMSE" if weighted else "RMSE"


def plain_rmse_label(y_unit: str | None) -> str:
    """The unweighted RMSE row of a weighted fit, in y's units."""
    return f"RMSE, unweighted (in {y_unit})" if y_unit else "RMSE, unweighted (in y's units)"


def stats_head(mode: str) -> tuple[str, str, str]:
    """The header of the model card's numbers: the hand-over fit, then the split's held-out rows."""
    return ("", "fit on every row", f"held out ({held_out_name(mode)})")


def weighting_note(fit) -> str:
    """What a weighted fit's RMSE and intervals mean ("" for an unweighted fit)."""
    if not fit.weighted:
        return ""
    base = (
        "Weighted fit: the weighted RMSE is √(Σ w·residual² / Σ w), which counts the rows with large weights "
        "more; the unweighted RMSE counts every row the same."
    )
    if fit.weighting not in ("column", "none"):
        return f"{base} Intervals at a new x use the weight the rule {fit.weighting} gives there."
    return base


def handover_note(model: ModelView) -> str:
    """The sentence under the model card: basis, the t quantile, the valid x range, and the fit's own warnings."""
    f = model.fit
    note = (
        f"Power basis in the original units; {level_text(model.level)} intervals use Student's t with "
        f"{f.dof} degrees of freedom "
        f"(t = {fmt_number(model.t_quantile, 5)}). Valid x range: {fmt_number(f.domain[0], 6)} to "
        f"{fmt_number(f.domain[1], 6)}."
    )
    return " ".join(part for part in [note, weighting_note(f), *f.warnings] if part)


def handover_residual_caption(model: ModelView) -> tuple[str, ...]:
    """The residual chart's caption, in short lines (a narrow chart must not cut them)."""
    return (
        f"Residual = y − the hand-over fit (every usable row, {fmt_count(model.fit.n)} rows)"
        + ("; a sample of the points is shown." if model.residual_sampled else "."),
        "A bend or a funnel in the points: the degree misses something.",
    )


def curve_label(degree: int, mode: str) -> str:
    """The fit chart's curve: the split's own fit, named for the rows it used."""
    if mode == "kfold":
        return f"degree {degree} fit (every row)"
    return f"degree {degree} fit on the training rows"


def outside_flag_short(outside: bool) -> str:
    """The prediction table's flag column: short, so the table fits its panel."""
    return "outside: extrapolation" if outside else ""


def level_text(level: float) -> str:
    """An interval level (a fraction) in per cent: 0.95 -> "95 %", 0.999 -> "99.9 %"."""
    return f"{round(level * 100, 6):g} %"


def prediction_head(
    x_name: str, x_unit: str | None, y_name: str, y_unit: str | None, level: float = 0.95
) -> tuple[str, ...]:
    """The prediction table's header: the column names with their units once, the intervals' level."""
    from ._format import label_with_unit

    return (
        label_with_unit(x_name, x_unit),
        f"predicted {label_with_unit(y_name, y_unit)}",
        f"{level_text(level)} confidence",
        f"{level_text(level)} prediction",
        "range",
    )


def interval_weight_note(fit) -> str:
    """Which weight a weighted model's prediction intervals assume at a new x ("" when unweighted)."""
    if fit.weighting == "column":
        return next((w for w in fit.warnings if "weight of 1 at a new x" in w), "")
    if fit.weighted:
        return f"Prediction intervals use the weight the rule {fit.weighting} gives at each x."
    return ""


PREDICT_NOTE = (
    "Predictions use the hand-over model (every usable row). Confidence: where the mean of y lies; "
    "prediction: where one new reading lies."
)
DOWNLOADS_NOTE = (
    "Downloads hold the model fitted on every usable row at the degree on screen; the split on screen only "
    "judged the degree."
)

# Words for every mark on the charts (figures.py draws them; these are their legend entries and key).
LEGEND_TRAINING_POINTS = "training rows"
LEGEND_TEST_POINTS = "held-out rows (test)"
LEGEND_TRAINING_RMSE = "training RMSE"
LEGEND_VERDICT = "verdict: cross-validated test RMSE"
LEGEND_CURRENT = "degree on screen"
LEGEND_RECOMMENDED = "recommended"
LEGEND_EXTRAPOLATION = "extrapolation"


def legend_test_rmse(with_se: bool) -> str:
    return "held-out test RMSE" + (" ± SE" if with_se else "")


def error_chart_key(view: SplitView) -> str:
    """One plain sentence for the error chart's marks, including the shaded column and the dashed line."""
    return (
        "Blue: how far the fit misses its own training rows. Amber: how far it misses the held-out rows "
        f"({view.split_label}). Dashed grey ({LEGEND_VERDICT!r}): the test error of {view.steady_label.rstrip('.')}, "
        "which the recommendation rests on. The red ring and the pale red column mark the degree on screen; "
        "the green star marks the recommended degree."
    )


def fit_chart_key(mode: str, dense: bool = False) -> str:
    """One plain sentence for the fit chart's marks."""
    curve = "every row" if mode == "kfold" else "the training rows only"
    rows = (
        "Blue shading: where the training rows lie, amber: the held-out rows (darker = more rows; click a name in "
        "the legend to hide or show it)."
        if dense
        else "Blue circles: training rows; amber diamonds: held-out rows."
    )
    return (
        f"{rows} The dark curve is fitted on {curve}; the "
        "blue band is its 95 % confidence band, the grey one its 95 % prediction band; shaded edges lie "
        "beyond the x range of those rows (extrapolation). The model card and the downloads use the fit on "
        "every row."
    )


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


def influence_shown(shown: int, flagged: int) -> str:
    """Above the influence table when it lists only the most influential of the flagged rows."""
    return (
        f"{fmt_count(flagged)} rows pass a threshold; the table and the rings show the {fmt_count(shown)} "
        "with the largest Cook's distance. On many rows, some pass by chance alone."
    )


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


# calibration: the read-back panel and the standards panel (app/panels/readback.py, standards.py)

READBACK_TITLE = "From a reading to x"
READBACK_INPUT_LABEL = "Readings y (commas, spaces or new lines; the mean of k readings each)"
READBACK_PLACEHOLDER = "e.g. 12.5, 40"
READBACK_COUNT_LABEL = "k (readings per unknown)"
READBACK_LEVEL_LABEL = "Interval level (%)"
READBACK_EMPTY = "Type one or more readings to read them back to x."
READBACK_HEAD = ("reading y", "x", "calibration interval", "u(x)")
STANDARDS_TITLE = "Standards read back"
WEIGHTING_LABEL = "Weighting of the fit"
TOLERANCE_LABEL = "Tolerance (±%)"
LOWEST_TOLERANCE_LABEL = "At the lowest level (±%)"
STANDARDS_HEAD = ("line", "x", "y", "x back", "error %", "result", "note")
WEIGHTING_HEAD = ("rank", "weighting", "Σ |error %|", "note")
STANDARDS_SOURCE = (
    "Defaults: ±15 %, ±20 % at the lowest level; at least 75 % of the standards and 6 levels must pass "
    "(FDA 2018 Bioanalytical Method Validation guidance and ICH M10, chromatographic assays). "
    "Other fields use other limits: set yours."
)
WEIGHTING_SOURCE = (
    "Each weighting is fitted at this degree and ranked by the sum of |error %| of the standards read back "
    "(smallest first), the criterion of Almeida, Castel-Branco and Falcão, J. Chromatogr. B 774 (2002) 215."
)
PASS, FAIL, NOT_JUDGED = "pass", "fail", "not judged"
FAILING_MARK_NAME = "standard outside tolerance"
READING_MARK_NAME = "reading"


def calibration_fitted(rows: int, degree: int, weighting: str) -> str:
    """Which fit the calibration panels read through."""
    return (
        f"Read through the degree {degree} fit on every one of the {fmt_count(rows)} usable rows "
        f"(weighting: {weighting})."
    )


def readback_interval(lo, hi, level: float, domain: tuple[float, float]) -> str:
    """ "lo … hi", an unbounded end written as "below lo" or "above hi" of the calibrated range."""
    a = fmt_number(lo, 6) if lo is not None else f"< {fmt_number(domain[0], 6)}"
    b = fmt_number(hi, 6) if hi is not None else f"> {fmt_number(domain[1], 6)}"
    return f"{a} … {b}"


def readback_interval_head(level: float) -> str:
    return f"{level * 100:g} % calibration interval"


def reading_label(y) -> str:
    """The label on a reading's line in the fit chart."""
    return f"reading {fmt_number(y, 6)}"


def readback_mean_of(k: int) -> str:
    return "Each reading is one reading." if k == 1 else f"Each reading is the mean of {k} readings."


def readbacks_shown(shown: int, total: int) -> str:
    return f"Showing the first {shown} of {total} readings; the chart marks the first {min(shown, 10)}."


def too_many_readings(limit: int, chars: int | None = None, max_chars: int | None = None) -> str:
    if chars is not None:
        return f"Type at most {limit} readings at a time (this text has {chars:,} characters; {max_chars:,} at most)."
    return f"Type at most {limit} readings at a time."


def not_a_reading(token: str, want: str, example: str) -> str:
    return f"{echo(token)} is not {want}; type readings like {example}."


def bad_count(value) -> str:
    return f"k, the number of readings averaged per unknown, must be a whole number from 1 to 1000, not {echo(value)}."


def bad_level(value) -> str:
    return f"The interval level must be a number from 50 to 99.9 (per cent), not {echo(value)}."


def bad_tolerance(what: str, value) -> str:
    return f"The {what} must be a number above 0 and at most 100 (per cent), not {echo(value)}."


def weights_and_rule(column: str, rule: str) -> str:
    return (
        f"The weights column {column!r} is chosen, so the named weighting {rule} cannot be used as well; "
        "choose the weighting “none” in the Columns panel, or clear the weights column."
    )


def too_many_standards(rows: int, limit: int) -> str:
    return (
        f"Reading every standard back is for calibration data: these columns have {fmt_count(rows)} rows, "
        f"{fmt_count(limit)} at most."
    )


def standards_summary(s) -> str:
    """The acceptance summary: share and number of levels passing, against the minimums."""
    share = "—" if s.standards == 0 else f"{s.share_passing_percent:.0f} %"
    verdict = (
        "Both minimums are met."
        if s.accepted
        else "Not accepted: "
        + "; ".join(
            part
            for part, met in (
                (f"fewer than {s.min_share_percent:g} % of the standards pass", s.share_met),
                (f"fewer than {s.min_levels} levels pass", s.levels_met),
            )
            if not met
        )
        + "."
    )
    marked = " Failing standards are crossed out in red on the fit chart." if s.standards_passing < s.standards else ""
    return (
        f"{s.standards_passing} of {s.standards} standards pass ({share}); "
        f"{s.levels_passing} of {s.levels} levels pass. {verdict}{marked}"
    )


def weighting_best(best: str | None, label: str | None) -> str:
    if best is None:
        return "No weighting could be ranked on these data."
    return f"Smallest sum: {label}."


def weighting_column_note(column: str) -> str:
    return f"The comparison uses the named weightings only; the weights column {column!r} is not part of it."


def unknown_weighting(value, names: tuple[str, ...]) -> str:
    return f"Unknown weighting {echo(value)}; choose one of {', '.join(names)}."


TOLERANCE_WHAT = "tolerance"
LOWEST_TOLERANCE_WHAT = "tolerance at the lowest level"
WEIGHTING_COMPARISON_TITLE = "Which weighting reads the standards back best"


def standard_note(x: float, note: str | None) -> str:
    """A standard's note; a blank (x = 0) always says it is a blank, which is not judged."""
    note = note or ""
    if x == 0 and "Blank" not in note:
        return f"Blank (x = 0): not judged. {note}".strip()
    return note


def density_note(rows: int, nx: int, ny: int, x_step: float, y_step: float) -> str:
    """The binning of a density chart, in the chart's corner."""
    return (
        f"{fmt_count(rows)} rows as a density: {nx} × {ny} bins of {x_step:.3g} (x) by {y_step:.3g} (y); "
        "darker = more rows"
    )
