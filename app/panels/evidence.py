"""The evidence for a degree: tests beside the verdict, how sure it is, single rows, rows left out.

* The evidence table (``fitting.degree_evidence``) stands beside the verdict's cross-validated
  RMSE, with the engine's sentence tying it to the recommended degree and the verdict's rule.
* Verdict stability (``fitting.verdict_stability``, 200 redraws) takes seconds: it has its own
  callback, started by the charts' settings record once the charts are drawn, and says
  "computing…" while it runs.
* Influence of single rows at the degree on screen: a table of the flagged rows, and a ring on
  the fit and residual charts, appended with ``dash.Patch`` by callbacks of this panel (the
  ring it appended before is removed by value, kept in its own store).
* Rows left out on purpose, with a reason, each one reversible; the exclusions live in the
  ``ids.EXCLUSIONS`` store and everything in this panel refits without them.
"""

from __future__ import annotations

from dash import ALL, Input, Output, Patch, State, ctx, dcc, html, no_update

from fitting import FitError

from .. import components, figures, ids, text, views_model
from .. import views_evidence as ve
from ..service import FitService
from ._common import PageConfig, notice_on_error, panel, whole
from .settings import from_key, parse_query

SLOT = "main"
STABILITY_REST_MS = 800  # the stability starts once the settings have rested this long (after the charts)
STABILITY_REST_JS = (
    """
async function(key, store) {
    const me = (window.__stabilityRest = (window.__stabilityRest || 0) + 1);
    await new Promise(function (r) { setTimeout(r, %d); });
    if (me !== window.__stabilityRest || !key) { return window.dash_clientside.no_update; }
    return me;
}
"""
    % STABILITY_REST_MS
)
RING_COLOUR = "#b8002e"
BAR_COLOUR, BAR_TOP = "#2a5d8f", "#2b8a3e"


def _leave_out_box() -> html.Div:
    inputs = html.Div(
        [
            html.Div(
                [
                    html.Label("Line number", htmlFor=ids.LEAVE_OUT_LINE),
                    dcc.Input(id=ids.LEAVE_OUT_LINE, type="text", inputMode="numeric", className="num", value=""),
                ]
            ),
            html.Div(
                [
                    html.Label("Reason (kept with the row)", htmlFor=ids.LEAVE_OUT_REASON),
                    dcc.Input(
                        id=ids.LEAVE_OUT_REASON, type="text", maxLength=ve.REASON_CHARS, className="reason", value=""
                    ),
                ],
                className="reason-box",
            ),
            html.Button("Leave this row out", id=ids.LEAVE_OUT_BUTTON, n_clicks=0, className="btn"),
        ],
        className="leave-out-row",
    )
    return html.Div(
        [
            html.H3("Rows left out", className="sub-title"),
            html.P(text.LEAVE_OUT_HELP, className="muted small"),
            inputs,
            html.Div(id=ids.LEAVE_OUT_NOTICE, className="notice", role="status"),
            html.Div(id=ids.LEFT_OUT_LIST),
        ],
        className="leave-out",
    )


def layout(cfg: PageConfig) -> html.Section:
    """The evidence table and sentences, the stability chart, the influence table and the rows left out."""
    table = html.Div(
        [
            html.P(id=ids.EVIDENCE_ROWS, className="evidence-rows"),
            html.P(id=ids.EVIDENCE_SENTENCE, className="evidence-sentence"),
            html.Div(id=ids.EVIDENCE_TABLE, className="table-scroll"),
            html.Div(id=ids.EVIDENCE_NOTES, className="muted small"),
            html.Div(id=ids.MANDEL, className="mandel"),
        ],
        className="evidence-left",
    )
    stability = html.Div(
        [
            html.H3("How sure the verdict is", className="sub-title"),
            html.P(text.COMPUTING, id=ids.STABILITY_STATUS, className="stability-status muted small"),
            html.P(id=ids.STABILITY_TEXT, className="stability-text", **{"aria-live": "polite"}),
            dcc.Graph(
                id=ids.STABILITY_CHART,
                figure=figures.empty_figure(text.COMPUTING),
                config={"displayModeBar": False},
                style={"height": "220px"},
            ),
        ],
        className="evidence-right",
    )
    influence = html.Div(
        [html.H3("Influence of single rows", className="sub-title"), html.Div(id=ids.INFLUENCE_TABLE)],
        className="influence",
    )
    return panel(
        text.EVIDENCE_TITLE,
        html.P(id=ids.EVIDENCE_RULE, className="evidence-rule small"),
        html.Div(
            [table, html.Div([stability, _leave_out_box()], className="evidence-side")], className="evidence-grid"
        ),
        influence,
        html.Div(id=ids.EVIDENCE_NOTICE, className="notice", role="status"),
        dcc.Store(id=ids.EXCLUSIONS),
        dcc.Store(id=ids.RING_FIT),
        dcc.Store(id=ids.RING_RESIDUAL),
        dcc.Store(id=ids.STABILITY_GO),
        class_name="evidence",
        id="evidence",
    )


# ----------------------------------------------------------------------------
# the evidence table, the sentences, Mandel's test, the influence table and the list of rows left out


def _context(key, store):
    """(dataset id, columns, split, exclusions, excluded line numbers) of the charts' settings record."""
    ds, cols, split = from_key(key)
    exclusions = ve.exclusions_of(store, ds)
    return ds, cols, split, exclusions, tuple(e.line for e in exclusions)


def _mandel_children(view: ve.EvidenceView, degree: int | None) -> list:
    if degree not in (1, 2):
        return []
    head = html.H3(text.mandel_heading(degree), className="sub-title")
    if view.mandel is None:
        return [head, html.P(text.mandel_missing(view.mandel_problem or ""), className="small")]
    return [head, html.P(view.mandel.conclusion), html.P(view.mandel.caution, className="muted small")]


def _influence_children(service, ds, cols, degree, excluded) -> list:
    if degree is None:
        return []
    try:
        inf = ve.influence(service, ds, cols, degree, excluded)
    except FitError as exc:
        return [html.P(str(exc), className="small")]
    flagged = ve.flagged_rows(inf)
    rows = most_influential(flagged)  # thousands of table rows would stall the page on large data
    head = html.P(text.influence_heading(inf.degree, inf.n), className="small")
    if len(rows) < len(flagged):
        head = [head, html.P(text.influence_shown(len(rows), len(flagged)), className="small")]
    body = components.influence_table(rows, inf.thresholds) if rows else html.P(text.no_flags(inf.degree))
    caution = html.P(inf.caution, className="muted small")
    heads = head if isinstance(head, list) else [head]
    return [*heads, html.Div(body, className="table-scroll"), components.threshold_list(inf.thresholds), caution]


OUTPUT = dict(
    rule=Output(ids.EVIDENCE_RULE, "children"),
    rows=Output(ids.EVIDENCE_ROWS, "children"),
    sentence=Output(ids.EVIDENCE_SENTENCE, "children"),
    table=Output(ids.EVIDENCE_TABLE, "children"),
    notes=Output(ids.EVIDENCE_NOTES, "children"),
    mandel=Output(ids.MANDEL, "children"),
    influence=Output(ids.INFLUENCE_TABLE, "children"),
    left_out=Output(ids.LEFT_OUT_LIST, "children"),
    notice=Output(ids.EVIDENCE_NOTICE, "children"),
)
INPUTS = dict(
    key=Input(ids.SPLIT_KEY, "data"), degree=Input(ids.DEGREE_SETTLED, "data"), store=Input(ids.EXCLUSIONS, "data")
)


def on_evidence(service: FitService, key, degree, store) -> dict:
    """The evidence at the rows in use, beside the verdict; Mandel's test for degree 1 or 2; the flagged rows."""
    if not key:
        return {name: no_update for name in OUTPUT}
    ds, cols, _split, exclusions, excluded = _context(key, store)
    view = ve.evidence_view(service, ds, cols, excluded)
    shown = whole(degree)
    ev = view.evidence
    notes = [] if ev.has_lack_of_fit else [html.P(text.lack_of_fit_absent(ev.replicates_note))]
    notes += [html.P(text.criteria_note(ev.criteria))] + [html.P(n) for n in ev.notes]
    return dict(
        rule=text.evidence_rule(view.rule, view.levels_held_out),
        rows=text.evidence_rows(view.rows_used, view.left_out, view.recommended),
        sentence=view.sentence,
        table=components.evidence_table(view, shown),
        notes=notes,
        mandel=_mandel_children(view, shown),
        influence=_influence_children(service, ds, cols, shown, excluded),
        left_out=components.left_out_list(exclusions, ids.PUT_BACK),
        notice="",
    )


# ----------------------------------------------------------------------------
# verdict stability: seconds of work, in its own callback


def stability_figure(st) -> dict:
    """Bars of the share of redraws that recommend each degree (degrees with no redraw left out)."""
    keep = [i for i, c in enumerate(st.counts) if c > 0]
    degs = [int(st.degrees[i]) for i in keep]
    shares = [round(100.0 * float(st.shares[i]), 1) for i in keep]
    colours = [BAR_TOP if d == st.modal_degree else BAR_COLOUR for d in degs]
    x_title, y_title = text.stability_axis()
    return dict(
        data=[
            dict(
                type="bar",
                x=[str(d) for d in degs],
                y=shares,
                marker=dict(color=colours),
                text=[f"{s:g} %" for s in shares],
                textposition="auto",
                hovertemplate="degree %{x}: %{y} % of redraws<extra></extra>",
            )
        ],
        layout=dict(
            margin=dict(l=50, r=10, t=10, b=40),
            bargap=0.45,
            xaxis=dict(title=dict(text=x_title), type="category"),
            yaxis=dict(title=dict(text=y_title), range=[0, 105]),
            paper_bgcolor="#fffdf8",
            plot_bgcolor="#fffdf8",
            font=dict(size=12),
        ),
    )


STABILITY_OUTPUT = dict(figure=Output(ids.STABILITY_CHART, "figure"), sentence=Output(ids.STABILITY_TEXT, "children"))
# the settings record and the exclusions go through a clientside rest (STABILITY_REST_JS) into STABILITY_GO
STABILITY_INPUTS = dict(go=Input(ids.STABILITY_GO, "data"))
STABILITY_STATE = dict(key=State(ids.SPLIT_KEY, "data"), store=State(ids.EXCLUSIONS, "data"))


def on_stability(service: FitService, key, store, go=None) -> dict:
    """The share of 200 fold redraws that give each degree, as bars and one sentence."""
    if not key:
        return {name: no_update for name in STABILITY_OUTPUT}
    ds, cols, _split, _exclusions, excluded = _context(key, store)
    st = ve.stability(service, ds, cols, excluded)
    return dict(figure=stability_figure(st), sentence=text.stability_line(st.sentence, st.held_out, st.folds))


# ----------------------------------------------------------------------------
# rings on the fit and residual charts


RING_LIMIT = 50  # rings drawn and table rows listed at most: on large data many rows pass a threshold


def most_influential(rows, limit: int = RING_LIMIT):
    """The ``limit`` flagged rows with the largest Cook's distance, in file order (all of them when fewer)."""
    if len(rows) <= limit:
        return rows
    keep = sorted(rows, key=lambda r: -(r.cooks if r.cooks == r.cooks else 0.0))[:limit]
    return sorted(keep, key=lambda r: r.line)


def ring_trace(rows, ys, chart: str) -> dict | None:
    """The ring trace over the flagged rows at heights ``ys`` (None when no row is flagged)."""
    if not rows:
        return None
    return dict(
        type="scatter",
        x=[r.x for r in rows],
        y=[float(v) for v in ys],
        mode="markers",
        name=text.ring_name(),
        meta=ids.RING_META,
        uid=f"{ids.RING_META}-{chart}",
        marker=dict(symbol="circle-open", size=17, color=RING_COLOUR, line=dict(width=2.5, color=RING_COLOUR)),
        customdata=[
            [
                r.line,
                r.x,
                r.y,
                r.leverage,
                r.studentized,
                r.cooks,
                text.INFLUENCE_VERDICT_WORDS.get(r.verdict, "review"),
            ]
            for r in rows
        ],
        hovertemplate=text.ring_hover(),
        showlegend=True,
    )


def ring_patch(previous, new) -> Patch:
    """A patch of a figure's traces: the ring this panel appended before goes, the new one is appended."""
    p = Patch()
    if previous:
        p["data"].remove(previous)
    if new:
        p["data"].append(new)
    return p


def _flagged(service, key, degree, store):
    ds, cols, split, _exclusions, excluded = _context(key, store)
    try:
        return ds, cols, split, ve.flagged_rows(ve.influence(service, ds, cols, int(degree), excluded))
    except FitError:
        return ds, cols, split, []


# the rings go on the fit chart's points layer, where the pointer reaches them (app/layers.py)
RING_FIT_OUTPUT = dict(figure=Output(ids.FIT_POINTS, "figure", allow_duplicate=True), ring=Output(ids.RING_FIT, "data"))
RING_FIT_INPUTS = dict(
    key=Input(ids.SPLIT_KEY, "data"), degree=Input(ids.DEGREE_SETTLED, "data"), store=Input(ids.EXCLUSIONS, "data")
)
RING_FIT_STATE = dict(previous=State(ids.RING_FIT, "data"))


def on_fit_ring(service: FitService, key, degree, store, previous) -> dict:
    """Ring the flagged rows on the fit chart (the settings record arrives with a fully drawn chart)."""
    if not key or whole(degree) is None:
        return {name: no_update for name in RING_FIT_OUTPUT}
    *_, rows = _flagged(service, key, whole(degree), store)
    rows = most_influential(rows)
    new = ring_trace(rows, [r.y for r in rows], "fit")
    return dict(figure=ring_patch(previous, new), ring=new)


RING_RESIDUAL_OUTPUT = dict(
    figure=Output(ids.RESIDUAL_CHART, "figure", allow_duplicate=True), ring=Output(ids.RING_RESIDUAL, "data")
)
# the model note is written with the residual chart: it fires once the chart is drawn
RING_RESIDUAL_INPUTS = dict(note=Input(ids.MODEL_NOTE, "children"), store=Input(ids.EXCLUSIONS, "data"))
RING_RESIDUAL_STATE = dict(
    key=State(ids.SPLIT_KEY, "data"),
    degree=State(ids.DEGREE_SETTLED, "data"),
    previous=State(ids.RING_RESIDUAL, "data"),
)


def on_residual_ring(service: FitService, note, store, key, degree, previous) -> dict:
    """Ring the flagged rows on the residual chart, at the residual of the hand-over fit the chart draws."""
    if not key or whole(degree) is None:
        return {name: no_update for name in RING_RESIDUAL_OUTPUT}
    ds, cols, split, rows = _flagged(service, key, whole(degree), store)
    rows = most_influential(rows)
    new = None
    if rows:
        fit = views_model.handover_fit(service, ds, cols, whole(degree))  # the fit the residual chart draws
        new = ring_trace(rows, [r.y - float(fit.predict([r.x])[0]) for r in rows], "residual")
    return dict(figure=ring_patch(previous, new), ring=new)


# ----------------------------------------------------------------------------
# leaving rows out and putting them back


LEAVE_OUTPUT = dict(
    store=Output(ids.EXCLUSIONS, "data", allow_duplicate=True),
    notice=Output(ids.LEAVE_OUT_NOTICE, "children"),
    line=Output(ids.LEAVE_OUT_LINE, "value"),
    reason=Output(ids.LEAVE_OUT_REASON, "value"),
)
LEAVE_INPUTS = dict(
    clicks=Input(ids.LEAVE_OUT_BUTTON, "n_clicks"),
    put_back=Input({"type": ids.PUT_BACK, "line": ALL}, "n_clicks"),
)
LEAVE_STATE = dict(
    line=State(ids.LEAVE_OUT_LINE, "value"),
    reason=State(ids.LEAVE_OUT_REASON, "value"),
    store=State(ids.EXCLUSIONS, "data"),
    key=State(ids.SPLIT_KEY, "data"),
)


def on_leave_out(service: FitService, clicks, put_back, line, reason, store, key, triggered=None) -> dict:
    """Leave the typed line out with its reason, or put a row back (``triggered``: the put-back button's line)."""
    unchanged = {name: no_update for name in LEAVE_OUTPUT}
    if not key:
        raise FitError("The charts are not ready yet; wait a moment or upload a file.")
    ds, cols, _split, exclusions, excluded = _context(key, store)
    if triggered is not None:
        back = whole(triggered)
        if back not in excluded:
            return unchanged
        kept = tuple(e for e in exclusions if e.line != back)
        return dict(store=ve.to_store(ds, kept), notice=text.put_back_done(back), line=no_update, reason=no_update)
    if not clicks:
        return unchanged
    n = ve.check_line(service, ds, cols, line, excluded)
    added = sorted((*exclusions, ve.Exclusion(n, ve.clean_reason(reason))), key=lambda e: e.line)
    return dict(store=ve.to_store(ds, added), notice=text.left_out_done(n), line="", reason="")


def _put_back_line() -> int | None:
    """The line of the put-back button that fired this call (only on a real click), else None."""
    tid = ctx.triggered_id
    if isinstance(tid, dict) and tid.get("type") == ids.PUT_BACK and ctx.triggered and ctx.triggered[0].get("value"):
        return tid.get("line")
    return None


CLICK_OUTPUT = dict(line=Output(ids.LEAVE_OUT_LINE, "value", allow_duplicate=True))
CLICK_INPUTS = dict(click=Input(ids.FIT_POINTS, "clickData"))
CLICK_STATE = dict(key=State(ids.SPLIT_KEY, "data"))


def on_chart_click(service: FitService, click, key) -> dict:
    """A click on a point of the fit chart puts that row's line number in the box (nothing is left out yet)."""
    points = click.get("points") if isinstance(click, dict) else None
    if not key or not isinstance(points, list) or not points or not isinstance(points[0], dict):
        return dict(line=no_update)
    pt = points[0]
    if isinstance(pt.get("customdata"), list) and pt["customdata"]:  # a ring carries the line itself
        return dict(line=str(whole(pt["customdata"][0], "")))
    ds, cols, _split = from_key(key)
    try:
        line = ve.line_at(service, ds, cols, float(pt.get("x")), float(pt.get("y")))
    except (TypeError, ValueError):
        return dict(line=no_update)
    return dict(line=no_update if line is None else str(line))


URL_OUTPUT = dict(store=Output(ids.EXCLUSIONS, "data"))
URL_INPUTS = dict(dataset=Input(ids.DATASET, "data"))
URL_STATE = dict(search=State(ids.URL, "search"))


def on_url(dataset, search, initial: bool = True) -> dict:
    """On the page's first load, the rows the URL leaves out (its ``out`` value), only when the URL names this
    very file content (``sha``): line numbers mean nothing in another file. A new dataset starts with none."""
    ds = dataset.get("id") if isinstance(dataset, dict) else None
    if not ds:
        return dict(store=no_update)
    q = parse_query(search)
    same_file = bool(q.get("sha")) and q.get("sha") == dataset.get("sha")
    found = ve.from_url_value(q.get("out")) if initial and same_file else ()
    return dict(store=ve.to_store(ds, found))


def register(app, service: FitService) -> None:
    """Wire the evidence, the stability, the rings, leaving rows out and the URL's exclusions."""
    app.callback(output=OUTPUT, inputs=INPUTS, on_error=notice_on_error(OUTPUT, "notice"))(
        lambda **kw: on_evidence(service, **kw)
    )
    app.clientside_callback(
        STABILITY_REST_JS,
        Output(ids.STABILITY_GO, "data"),
        Input(ids.SPLIT_KEY, "data"),
        Input(ids.EXCLUSIONS, "data"),
    )
    app.callback(
        output=STABILITY_OUTPUT,
        inputs=STABILITY_INPUTS,
        state=STABILITY_STATE,
        prevent_initial_call=True,
        running=[(Output(ids.STABILITY_STATUS, "children"), text.COMPUTING, "")],
        on_error=notice_on_error(STABILITY_OUTPUT, "sentence"),
    )(lambda **kw: on_stability(service, **kw))
    app.callback(
        output=RING_FIT_OUTPUT,
        inputs=RING_FIT_INPUTS,
        state=RING_FIT_STATE,
        prevent_initial_call=True,
        on_error=notice_on_error(RING_FIT_OUTPUT, ids.EVIDENCE_NOTICE),
    )(lambda **kw: on_fit_ring(service, **kw))
    app.callback(
        output=RING_RESIDUAL_OUTPUT,
        inputs=RING_RESIDUAL_INPUTS,
        state=RING_RESIDUAL_STATE,
        prevent_initial_call=True,
        on_error=notice_on_error(RING_RESIDUAL_OUTPUT, ids.EVIDENCE_NOTICE),
    )(lambda **kw: on_residual_ring(service, **kw))
    app.callback(
        output=LEAVE_OUTPUT,
        inputs=LEAVE_INPUTS,
        state=LEAVE_STATE,
        prevent_initial_call=True,
        on_error=notice_on_error(LEAVE_OUTPUT, "notice"),
    )(lambda **kw: on_leave_out(service, triggered=_put_back_line(), **kw))
    app.callback(output=CLICK_OUTPUT, inputs=CLICK_INPUTS, state=CLICK_STATE, prevent_initial_call=True)(
        lambda **kw: on_chart_click(service, **kw)
    )
    app.callback(output=URL_OUTPUT, inputs=URL_INPUTS, state=URL_STATE)(
        lambda **kw: on_url(initial=ctx.triggered_id is None, **kw)
    )
