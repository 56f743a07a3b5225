"""The evidence panel's callbacks as plain functions: the evidence table, stability, influence rings, rows left out.

Outside references, named beside each check:
* lack of fit: the NIST/SEMATECH e-Handbook, section 4.4.4.6 (pure error within x levels, n − m df;
  lack of fit on m − p df), recomputed here with numpy and pandas' groupby;
* added-term F and Mandel's PG: statsmodels' compare_f_test of the nested OLS polynomial fits;
* leverage: statsmodels' OLSInfluence hat values;
* AIC and BIC differences: statsmodels OLS aic/bic (constants cancel in differences).
"""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from conftest import SAMPLES
from dash import Patch
from scipy import stats

import fitting
from app import edge, ids, text, views_model
from app import views_evidence as ve
from app.panels import charts
from app.panels import evidence as E
from fitting import FitError


def _key(service, name: str, csv: bytes | None = None) -> dict:
    info = service.load_bytes(csv, name) if csv is not None else service.load_path(SAMPLES / name)
    st = info.to_store()
    return charts.on_split(service, st, st["x"], st["y"], None, None, "holdout", 25, 10, 0)["split_key"]


def _json(component) -> str:
    return json.dumps(component, default=lambda c: c.to_plotly_json(), ensure_ascii=False)


def _poly_ols(x, y, d):
    return sm.OLS(y, np.vander(x / np.abs(x).max(), d + 1, increasing=True)).fit()


def _rows_of(table) -> list[list[str]]:
    body = table.children[1].children
    return [[str(c.children) for c in tr.children] for tr in body]


def test_evidence_table_with_replicates_matches_the_e_handbook_lack_of_fit(fit_service):
    key = _key(fit_service, "van_fuel.csv")
    out = E.on_evidence(fit_service, key, 3, None)
    ds, cols, _ = charts.from_key(key)
    sel = fit_service.selection(ds, cols)
    head = [str(th.children) for th in out["table"].children[0].children.children]
    assert "lack-of-fit F" in head and "lack-of-fit p" in head and "CV test RMSE ± SE" in head
    rows = {int(r[0]): r for r in _rows_of(out["table"])}
    # NIST/SEMATECH e-Handbook 4.4.4.6: SS_PE within x levels (pandas groupby), SS_LOF = RSS − SS_PE
    frame = pd.DataFrame({"x": sel.x, "y": sel.y})
    ss_pe = float(((frame.y - frame.groupby("x").y.transform("mean")) ** 2).sum())
    n, m = sel.x.size, frame.x.nunique()
    for d in (1, 2, 3):
        rss = float(_poly_ols(sel.x, sel.y, d).ssr)
        f = ((rss - ss_pe) / (m - d - 1)) / (ss_pe / (n - m))
        p = float(stats.f.sf(f, m - d - 1, n - m))
        assert rows[d][2] == f"{f:.4g}" and rows[d][3] == f"{m - d - 1}, {n - m}" and rows[d][4] == text.p_value(p)
    steady = fit_service.steady_sweep(ds, cols)
    i = steady.index(3)
    assert rows[3][1].startswith(f"{steady.test_rmse[i]:.4g} ± ")  # the verdict's own CV RMSE beside the tests
    assert "nan" not in _json(out["table"]).lower()


def test_without_replicates_one_sentence_says_why_and_no_cell_is_blank(fit_service):
    key = _key(fit_service, "sensor_calibration.csv")
    out = E.on_evidence(fit_service, key, 3, None)
    head = [str(th.children) for th in out["table"].children[0].children.children]
    assert not any("lack-of-fit" in h for h in head)
    notes = _json(out["notes"])
    assert "No lack-of-fit test here: no x level has replicates" in notes
    for row in _rows_of(out["table"]):
        assert all(cell.strip() and cell.lower() != "nan" for cell in row)
    assert "whole x levels" not in out["rule"]


def test_added_term_and_aic_bic_match_statsmodels(fit_service):
    key = _key(fit_service, "cubic_small_noisy.csv")
    out = E.on_evidence(fit_service, key, 3, None)
    ds, cols, _ = charts.from_key(key)
    sel = fit_service.selection(ds, cols)
    rows = {int(r[0]): r for r in _rows_of(out["table"])}
    fits = {d: _poly_ols(sel.x, sel.y, d) for d in range(0, 8)}
    for d in (1, 2, 3, 4):
        f, p, _ = fits[d].compare_f_test(fits[d - 1])  # statsmodels: the extra-sum-of-squares F
        assert rows[d][2] == f"{f:.4g}" and rows[d][3] == text.p_value(p)
    aic0, bic0 = min(fits[d].aic for d in rows), min(fits[d].bic for d in rows)
    assert float(rows[4][4]) == pytest.approx(fits[4].aic - aic0, rel=1e-3)
    assert float(rows[4][5]) == pytest.approx(fits[4].bic - bic0, rel=1e-3)
    assert rows[0][2] == "—"  # degree 0 has no added term: a dash, never blank or NaN


def test_sentence_and_rule_come_from_the_verdict(fit_service):
    key = _key(fit_service, "van_fuel.csv")
    ds, cols, _ = charts.from_key(key)
    out = E.on_evidence(fit_service, key, 3, None)
    steady = fit_service.steady_sweep(ds, cols)
    sel = fit_service.selection(ds, cols)
    ev = fitting.degree_evidence(sel.x, sel.y)
    assert out["sentence"] == fitting.evidence_sentence(ev, steady.recommended_degree)
    assert steady.verdict_rule in out["rule"] and "whole x levels" in out["rule"]
    assert f"Recommended degree {steady.recommended_degree}, from 200 rows" in out["rows"]


@pytest.mark.parametrize("degree", [1, 2, 3])
def test_mandel_shown_for_degree_one_or_two_with_its_low_power_note(fit_service, degree):
    key = _key(fit_service, "cubic_small_noisy.csv")
    out = E.on_evidence(fit_service, key, degree, None)
    if degree == 3:
        assert out["mandel"] == []
        return
    ds, cols, _ = charts.from_key(key)
    sel = fit_service.selection(ds, cols)
    pg, _, _ = _poly_ols(sel.x, sel.y, 2).compare_f_test(_poly_ols(sel.x, sel.y, 1))  # statsmodels: PG = F
    words = _json(out["mandel"])
    assert f"PG = {pg:.4g}" in words and "low power" in words and "not proof of linearity" in words


def test_stability_bars_and_sentence(fit_service):
    key = _key(fit_service, "dose_response.csv")
    out = E.on_stability(fit_service, key, None)
    bars = out["figure"]["data"][0]
    assert sum(bars["y"]) == pytest.approx(100.0, abs=0.2)
    assert "of 200 redraws of the folds" in out["sentence"] and out["sentence"].startswith("The verdict gives degree")
    ds, cols, _ = charts.from_key(key)
    sel = fit_service.selection(ds, cols)
    st = fitting.verdict_stability(sel.x, sel.y, draws=200, seed=0)
    assert bars["x"][int(np.argmax(bars["y"]))] == str(st.modal_degree)


LEVER = "x,y\n" + "\n".join(f"{v},{2 + 0.5 * v + 0.02 * ((v * 7) % 5 - 2)}" for v in range(1, 21)) + "\n60,32.0\n"


def test_influence_table_leverage_alone_is_review_and_matches_statsmodels(fit_service):
    key = _key(fit_service, "lever.csv", LEVER.encode())
    out = E.on_evidence(fit_service, key, 1, None)
    words = _json(out["influence"])
    table = out["influence"][1].children
    (row22,) = [r for r in _rows_of(table) if r[0] == "22"]
    assert row22[6] == "review" and "outlier" not in " ".join(row22).lower() and "leverage >" in row22[7]
    ds, cols, _ = charts.from_key(key)
    sel = fit_service.selection(ds, cols)
    h = _poly_ols(sel.x, sel.y, 1).get_influence().hat_matrix_diag  # statsmodels OLSInfluence
    inf = ve.influence(fit_service, ds, cols, 1)
    assert np.allclose(inf.leverage, h, rtol=1e-9)
    row = [r for r in ve.flagged_rows(inf) if r.line == 22][0]
    assert "leverage" in row.flags and set(row.flags) <= {"leverage", "dffits"} and row.verdict == "review"
    assert "Source: Belsley, Kuh and Welsch" in words  # each threshold stated with its source


def _ops(patch: Patch) -> list[dict]:
    return patch.to_plotly_json()["operations"]


def test_rings_are_appended_and_the_previous_one_removed_by_value(fit_service):
    key = _key(fit_service, "lever.csv", LEVER.encode())
    first = E.on_fit_ring(fit_service, key, 1, None, None)
    ring = first["ring"]
    assert ring["meta"] == ids.RING_META and [c[0] for c in ring["customdata"]] == [22]
    assert [op["operation"] for op in _ops(first["figure"])] == ["Append"]
    second = E.on_fit_ring(fit_service, key, 1, None, ring)
    ops = _ops(second["figure"])
    assert [op["operation"] for op in ops] == ["Remove", "Append"] and ops[0]["params"]["value"] == ring
    ds, cols, split = charts.from_key(key)
    res = E.on_residual_ring(fit_service, "note", None, key, 1, None)["ring"]
    fit = views_model.handover_fit(fit_service, ds, cols, 1)  # the model card's fit, drawn on the residual chart
    assert res["y"][0] == pytest.approx(32.0 - float(fit.predict([60.0])[0]))
    assert "line %{customdata[0]}" in res["hovertemplate"]


def test_leave_a_row_out_refits_the_evidence_and_can_be_undone(fit_service):
    key = _key(fit_service, "cubic_small_noisy.csv")
    ds, cols, _ = charts.from_key(key)
    sel = fit_service.selection(ds, cols)
    line = int(sel.line_numbers[4])
    out = E.on_leave_out(fit_service, 1, [], f" {line} ", "bubble\tin the cell", None, key)
    store = out["store"]
    assert store == {"dataset": ds, "rows": [{"line": line, "reason": "bubble in the cell"}]}
    ev = E.on_evidence(fit_service, key, 3, store)
    keep = sel.line_numbers != line
    verdict = fitting.verdict_sweep(sel.x[keep], sel.y[keep])
    assert f"from {sel.rows_used - 1} rows (1 row left out by the analyst)" in ev["rows"]
    assert f"Recommended degree {verdict.recommended_degree}," in ev["rows"]
    assert "bubble in the cell" in _json(ev["left_out"])
    evidence = fitting.degree_evidence(sel.x[keep], sel.y[keep])
    assert ev["sentence"] == fitting.evidence_sentence(evidence, verdict.recommended_degree)
    used = ve.selection(fit_service, ds, cols, (line,))
    assert used.dropped[text.LEFT_OUT_REASON].listed_lines == [line] and line not in used.line_numbers
    back = E.on_leave_out(fit_service, 1, [1], "", "", store, key, triggered=line)
    assert back["store"]["rows"] == [] and back["notice"] == text.put_back_done(line)
    assert "from 30 rows." in E.on_evidence(fit_service, key, 3, back["store"])["rows"]


def test_typed_lines_are_checked_at_the_edge(fit_service):
    key = _key(fit_service, "cubic_small_noisy.csv")
    ds, cols, _ = charts.from_key(key)
    line = int(fit_service.selection(ds, cols).line_numbers[0])
    store = {"dataset": ds, "rows": [{"line": line, "reason": ""}]}
    for typed, words in [("12a", "is not a line number"), ("1", "is not a data row"), ("999", "is not a data row")]:
        with pytest.raises(FitError, match=words):
            E.on_leave_out(fit_service, 1, [], typed, "", None, key)
    with pytest.raises(FitError, match="already left out"):
        E.on_leave_out(fit_service, 1, [], str(line), "", store, key)
    tiny = _key(fit_service, "tiny.csv", b"x,y\n1,2\n2,3.9\n3,6.2\n")
    with pytest.raises(FitError, match="Only 2 rows would remain"):
        E.on_leave_out(fit_service, 1, [], "2", "", None, tiny)


def test_exclusions_of_another_dataset_do_not_apply(fit_service):
    key = _key(fit_service, "cubic_small_noisy.csv")
    other = {"dataset": "someone-else", "rows": [{"line": 8, "reason": ""}]}
    assert "from 30 rows." in E.on_evidence(fit_service, key, 3, other)["rows"]


def test_url_value_round_trip_and_first_load_only():
    rows = (ve.Exclusion(12, "drift; re-run"), ve.Exclusion(40, ""))
    value = ve.url_value(rows)
    assert ve.from_url_value(value) == rows
    for bad in ("[[", "{}", '[["a", 1]]', '[[0, "x"]]', "x" * (ve.URL_CHARS + 1)):
        assert ve.from_url_value(bad) == ()
    from urllib.parse import urlencode

    search = "?" + urlencode({"x": "a", "sha": "abc123", "out": value})
    first = E.on_url({"id": "d1", "sha": "abc123"}, search, initial=True)["store"]
    assert first["rows"][0] == {"line": 12, "reason": "drift; re-run"}
    assert E.on_url({"id": "d2", "sha": "abc123"}, search, initial=False)["store"] == {"dataset": "d2", "rows": []}
    # another file content (or none named): line numbers would point at other rows, so nothing is left out
    assert E.on_url({"id": "d3", "sha": "fff000"}, search, initial=True)["store"]["rows"] == []
    no_sha = "?" + urlencode({"x": "a", "out": value})
    assert E.on_url({"id": "d4", "sha": "abc123"}, no_sha, initial=True)["store"]["rows"] == []


def test_click_on_a_point_fills_the_line_box(fit_service):
    key = _key(fit_service, "cubic_small_noisy.csv")
    ds, cols, _ = charts.from_key(key)
    sel = fit_service.selection(ds, cols)
    click = {"points": [{"x": float(sel.x[3]), "y": float(sel.y[3]), "curveNumber": 0}]}
    assert E.on_chart_click(fit_service, click, key)["line"] == str(int(sel.line_numbers[3]))
    ring_click = {"points": [{"x": 1, "y": 2, "customdata": [22, 60, 32]}]}
    assert E.on_chart_click(fit_service, ring_click, key)["line"] == "22"


def test_schema_refuses_malformed_exclusions():
    def body(value):
        return {"inputs": [{"id": ids.EXCLUSIONS, "property": "data", "value": value}]}

    assert edge.check_callback_body(body({"dataset": "d", "rows": [{"line": 3, "reason": "r"}]})) is None
    assert edge.check_callback_body(body({"dataset": "d", "rows": [{"line": "3"}]})) is not None
    assert edge.check_callback_body(body({"dataset": "d"})) is not None


def test_the_panel_is_on_the_page_and_stability_has_its_own_callback():
    import app

    dash_app = app.create_app()
    layout = _json(dash_app.layout() if callable(dash_app.layout) else dash_app.layout)
    for cid in (ids.EVIDENCE_TABLE, ids.STABILITY_CHART, ids.INFLUENCE_TABLE, ids.LEAVE_OUT_LINE, ids.EXCLUSIONS):
        assert f'"{cid}"' in layout
    stability = [k for k in dash_app.callback_map if ids.STABILITY_CHART in k]
    evidence = [k for k in dash_app.callback_map if ids.EVIDENCE_TABLE in k]
    assert stability and evidence and stability != evidence  # never in the charts' or the table's callback
    assert not any(ids.STABILITY_CHART in k and ids.FIT_CHART in k for k in dash_app.callback_map)


def test_a_value_being_computed_is_waited_for_not_computed_twice():
    import threading
    import time

    cache, calls = ve._Cache(4), []

    def make():
        calls.append(1)
        time.sleep(0.3)
        return 42

    threads = [threading.Thread(target=lambda: cache.get(("k",), make)) for _ in range(3)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    assert calls == [1] and cache.get(("k",), make) == 42


def test_stability_waits_for_the_settings_to_rest():
    import app

    dash_app = app.create_app()
    (key,) = [k for k in dash_app.callback_map if ids.STABILITY_CHART in k]
    assert [i["id"] for i in dash_app.callback_map[key]["inputs"]] == [ids.STABILITY_GO]
    assert E.STABILITY_REST_MS >= 500 and "setTimeout" in E.STABILITY_REST_JS


def test_rings_are_kept_to_the_most_influential_rows():
    # common practice, no source: on large data many rows pass a threshold; ring the largest Cook's distances
    from types import SimpleNamespace

    from app.panels.evidence import RING_LIMIT, most_influential

    rows = [SimpleNamespace(line=i + 2, cooks=float(i % 97)) for i in range(500)]
    kept = most_influential(rows)
    assert len(kept) == RING_LIMIT
    assert [r.line for r in kept] == sorted(r.line for r in kept)
    assert min(r.cooks for r in kept) >= sorted((r.cooks for r in rows), reverse=True)[RING_LIMIT - 1]
    assert most_influential(rows[:3]) == rows[:3]


def test_rows_left_out_travel_with_their_reasons_into_the_model_file_and_the_report(fit_service):
    # issue requirement (no outside source): the hand-over records each row left out and why
    from app.panels import downloads
    from app.panels.settings import split_key

    key = _key(fit_service, "cubic_small_noisy.csv")
    ds, cols, _ = charts.from_key(key)
    line = int(fit_service.selection(ds, cols).line_numbers[4])
    store = {"dataset": ds, "rows": [{"line": line, "reason": "bubble in the cell"}]}
    left_key = split_key({"id": ds}, key["x"], key["y"], None, None, key["mode"], 25, key["folds"], key["seed"], [line])
    model = json.loads(
        downloads.on_export(fit_service, "model", left_key, 3, [], "", None, store)["download"]["content"]
    )
    excluded = model["fitted_from"]["rows_excluded"]
    assert excluded["lines"] == [line] and "bubble in the cell" in excluded["reason"]
    assert model["fitted_from"]["rows_used"] == fit_service.selection(ds, cols).rows_used - 1
    report = downloads.on_export(fit_service, "report", left_key, 3, [], "", None, store)["download"]["content"]
    assert "bubble in the cell" in report
