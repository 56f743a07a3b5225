"""The data panel as plain functions: shared views that name their file, the degree following the columns,
every row left out listed with its lines, labelled sweep notes, workbook sheets and pasted tables.

The expected line numbers, column names and settings are written by hand from the invented tables
below (no reference library is needed: each check compares with the table as written).
"""

from __future__ import annotations

import base64
import io

import numpy as np
import pytest
from dash import no_update

from app import text
from app.panels import charts, data
from app.panels.settings import parse_query, split_key, url_query, with_view_extras
from app.service import PASTED_NAME, Columns, FitService
from app.store import DatasetStore
from fitting import FileTooLargeError, IntakeError


def data_url(raw: bytes, mime: str = "text/csv") -> str:
    return f"data:{mime};base64," + base64.b64encode(raw).decode()


def new_service(limit: int = 128 * 2**20) -> FitService:
    return FitService(DatasetStore(), upload_limit_bytes=limit)


def quad_csv(n: int = 40) -> bytes:
    """Invented: an oven's set point (x) against two readings, one straight, one bending (with noise)."""
    rng = np.random.default_rng(5)
    x = np.linspace(0, 10, n)
    lines = ["set point (C),straight,bending,batch"]
    for i, v in enumerate(x):
        s = 2 + 0.5 * v + rng.normal(0, 0.05)
        b = 1 + 0.3 * v - 0.8 * v**2 + 0.09 * v**3 + rng.normal(0, 0.05)
        lines.append(f"{v:.4f},{s:.5f},{b:.5f},{i % 4}")
    return ("\n".join(lines) + "\n").encode()


def run_split(service, store, **kw):
    args = dict(dataset=store, x=store["x"], y=store["y"], weights=None, group=None, mode="holdout", holdout=25)
    args.update(dict(folds=10, seed=0, degree=None, bands=["confidence"]))
    args.update(kw)
    return charts.on_split(service, **args)


# ----------------------------------------------------------------------------
# 1. a shared view names its file


def test_the_url_names_the_file_and_keeps_bands_and_level(sensor):
    service, info, cols = sensor
    key = split_key(info.to_store(), cols.x, cols.y, None, "batch", "ordered", 30, 5, 7)
    q = parse_query(with_view_extras(url_query(key, 2), ["prediction"], 90))
    assert q["file"] == "sensor_calibration.csv" and q["sha"] == info.digest and len(info.digest) == 12
    assert (q["x"], q["g"], q["mode"], q["degree"], q["bands"], q["level"]) == (
        cols.x,
        "batch",
        "ordered",
        "2",
        "prediction",
        "90",
    )
    none = parse_query(with_view_extras(url_query(key, 2), [], None))
    assert none["bands"] == "none" and none["level"] == "95"


def shared_view(service, raw: bytes, name: str) -> tuple[dict, str]:
    up = data.on_upload(service, data_url(raw), name)["dataset"]
    key = split_key(up, "set point (C)", "bending", None, "batch", "ordered", 30, 10, 0)
    return up, with_view_extras(url_query(key, 2), ["confidence", "prediction"], 95)


def test_a_view_of_a_file_not_loaded_waits_for_it_then_applies(sensor):
    service, sample, _ = sensor
    raw = quad_csv()
    _, search = shared_view(new_service(), raw, "oven.csv")  # made in another browser, on another server
    first = data.on_dataset(service, sample.to_store(), search)
    assert "load 'oven.csv' to restore this view" in first["view_notice"]
    assert first["pending"] == {"search": search, "file": "oven.csv"}
    assert first["x"] == sample.default_x and first["degree"] is None  # the start-up file, at its defaults
    # the page keeps the shared URL while the view waits (the model card's URL is put back)
    assert data.on_url("?file=sensor_calibration.csv&x=a&y=b", ["confidence"], 95, first["pending"]) == {
        "search": search
    }
    # another file arrives: still waiting
    other = data.on_dataset(service, sample.to_store(), "", first["pending"])
    assert other["pending"] == first["pending"] and "load 'oven.csv'" in other["view_notice"]
    # the colleague loads the same file: the view is applied
    up = data.on_upload(service, data_url(raw), "oven.csv")["dataset"]
    out = data.on_dataset(service, up, "?whatever", first["pending"])
    assert (out["x"], out["y"], out["group"], out["mode"], out["holdout"], out["degree"]) == (
        "set point (C)",
        "bending",
        "batch",
        "ordered",
        30,
        2,
    )
    assert out["bands"] == ["confidence", "prediction"] and out["level"] == 95.0
    assert out["pending"] is None and "Restored" in out["view_notice"]
    assert out["seen"] == [up["id"], "set point (C)", "bending", None, "batch", "none"]  # the URL's degree is kept


def test_a_view_whose_columns_are_missing_says_so(sensor):
    service, sample, _ = sensor
    _, search = shared_view(new_service(), quad_csv(), "oven.csv")
    pending = data.on_dataset(service, sample.to_store(), search)["pending"]
    up = data.on_upload(service, data_url(b"a,b\n1,2\n2,3\n3,5\n4,4\n"), "oven.csv")["dataset"]
    out = data.on_dataset(service, up, "", pending)
    assert "does not have" in out["view_notice"] and "'set point (C)'" in out["view_notice"]
    assert (out["x"], out["y"], out["degree"], out["pending"]) == ("a", "b", None, None)


def test_changed_content_of_the_same_name_is_named(sensor):
    service, sample, _ = sensor
    _, search = shared_view(new_service(), quad_csv(), "oven.csv")
    pending = data.on_dataset(service, sample.to_store(), search)["pending"]
    up = data.on_upload(service, data_url(quad_csv(41)), "oven.csv")["dataset"]
    out = data.on_dataset(service, up, "", pending)
    assert out["x"] == "set point (C)" and "differs in content" in out["view_notice"]


def test_reloading_finds_the_file_this_session_still_holds(sensor):
    service, sample, _ = sensor
    up, search = shared_view(service, quad_csv(), "oven.csv")
    first = data.on_dataset(service, sample.to_store(), search)
    assert first["view_notice"] == "" and first["pending"]["file"] == "oven.csv"  # nothing asked: it is held
    assert first["x"] is no_update
    assert data.on_restore(service, search, sample.to_store(), data.URL_UNREAD) == {"dataset": up}
    out = data.on_dataset(service, up, search, first["pending"])
    assert out["degree"] == 2 and out["group"] == "batch"
    assert data.on_restore(service, search, up, None) == {"dataset": no_update}  # already on screen


def test_the_url_gets_bands_and_level_once_the_view_is_read():
    q = "?file=f.csv&x=a&y=b&degree=2"
    assert data.on_url(q, ["confidence"], 95, data.URL_UNREAD) == {"search": no_update}
    out = data.on_url(q, ["prediction"], 99, None)["search"]
    assert parse_query(out)["bands"] == "prediction" and parse_query(out)["level"] == "99"
    assert data.on_url(out, ["prediction"], 99, None) == {"search": no_update}
    assert data.on_url("", ["prediction"], 99, None) == {"search": no_update}


# ----------------------------------------------------------------------------
# 2. the degree follows the data


def test_new_columns_start_at_their_recommendation_a_hand_degree_stays_with_its_columns(fit_service):
    # decided in the split callback itself, with the figures: an older answer cannot move the slider later
    up = data.on_upload(fit_service, data_url(quad_csv()), "oven.csv")["dataset"]
    straight = run_split(fit_service, up, x="set point (C)", y="straight", seen=None)
    first = straight["seen"]
    assert first == [up["id"], "set point (C)", "straight", None, None, "none"]
    rec1 = int(straight["recommended_degree"].split()[-1])
    assert straight["degree"] == rec1
    # the user drags to 6 with the same columns: kept
    kept = run_split(fit_service, up, x="set point (C)", y="straight", degree=6, seen=first)
    assert (
        kept["degree"] is no_update
        and kept["seen"] is no_update
        and "Degree 6 fit" in kept["fit_figure"].layout.title.text
    )
    # y changes while the slider still says 6: the degree goes to the new recommendation, drawn at once
    bending = run_split(fit_service, up, x="set point (C)", y="bending", degree=6, seen=first)
    rec2 = int(bending["recommended_degree"].split()[-1])
    assert rec1 != rec2 and bending["degree"] == rec2 and bending["seen"][2] == "bending"
    assert f"Degree {rec2} fit" in bending["fit_figure"].layout.title.text
    # weights are part of the columns too
    weighted = run_split(
        fit_service, up, x="set point (C)", y="bending", weights="straight", degree=5, seen=bending["seen"]
    )
    assert weighted["seen"][3] == "straight" and weighted["degree"] in (no_update, weighted["degree"])
    assert (
        f"Degree {5 if weighted['degree'] is no_update else weighted['degree']} fit"
        in weighted["fit_figure"].layout.title.text
    )


def test_default_columns_pass_over_a_counter_and_say_why(fit_service):
    rows = ["injection,conc (mg/L),area"] + [
        f"{i % 3 + 1},{c},{0.1 + 2.0 * c + 0.01 * i}" for i, c in enumerate(range(12))
    ]
    up = data.on_upload(fit_service, data_url(("\n".join(rows) + "\n").encode()), "assay.csv")["dataset"]
    out = data.on_dataset(fit_service, up, "")
    assert (out["x"], out["y"]) == ("conc (mg/L)", "area")
    assert "'injection'" in out["column_note"] and "counter" in out["column_note"]
    plain = data.on_dataset(fit_service, data.on_upload(fit_service, data_url(quad_csv()), "o.csv")["dataset"], "")
    assert "first two numeric columns" in plain["column_note"]


# ----------------------------------------------------------------------------
# 3. every row left out, with its lines; one note per sweep


def as_text(children) -> str:
    return str([c.to_plotly_json() for c in children])


def test_every_reason_lists_its_lines_including_na_markers(fit_service):
    body = [f"{i},{2 * i + 1}" for i in range(1, 40)]
    for line in (9, 14, 27, 28):  # file line numbers (the header is line 1)
        body[line - 2] = f"{line - 1},n/a"
    body[30 - 2] = "29,-"
    raw = ("x,y\n" + "\n".join(body) + "\n").encode()
    up = data.on_upload(fit_service, data_url(raw), "gaps.csv")["dataset"]
    out = data.on_dataset(fit_service, up, "")
    report = as_text(out["intake"])
    assert "lines 9, 14, 27, 28, 30" in report and "5 rows are left out" in report
    key = run_split(fit_service, up)["split_key"]
    again = as_text(data.on_selection(fit_service, key)["intake"])
    assert "lines 9, 14, 27, 28, 30" in again


def test_a_long_list_of_lines_is_shortened_with_a_count():
    assert text.lines_list([9, 14, 27, 28], 4) == "lines 9, 14, 27, 28"
    assert text.lines_list([5], 1) == "line 5"
    long = text.lines_list(list(range(2, 52)), 50)
    assert long.startswith("lines 2, 3,") and long.endswith("and 38 more (50 in all)")
    assert text.dropped_line("missing or non-numeric y", 2, [3, 4]) == "Missing or non-numeric y (2 rows): lines 3, 4."


def test_the_degree_cap_note_appears_once_labelled_with_its_sweep(fit_service):
    # 18 distinct x values: the 10-fold verdict sweep and a 50 % holdout cap the degree at different places
    rows = ["x,y"] + [f"{v},{np.sin(v / 3):.6f}" for v in range(18)]
    up = data.on_upload(fit_service, data_url(("\n".join(rows) + "\n").encode()), "few.csv")["dataset"]
    key = run_split(fit_service, up, holdout=50)["split_key"]
    from app.panels.settings import from_key

    view = fit_service.split_view(*from_key(key))
    capped = [w for w in (*view.sweep.warnings, *view.steady.warnings) if "were left out" in w]
    assert len(capped) == 2 and capped[0] != capped[1]  # the two sweeps' contradicting notes exist
    notes = [p.children for p in data.on_selection(fit_service, key)["sweep_notes"]]
    caps = [n for n in notes if "were left out" in n]
    assert len(caps) == 1 and caps[0].startswith(f"Charts' split, {view.split_label}: Degrees")


# ----------------------------------------------------------------------------
# 4. workbooks and pasted tables


def workbook() -> bytes:
    openpyxl = pytest.importorskip("openpyxl")
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "read me"
    ws.append(["Invented data for a test; the numbers are on the other sheets."])
    for title, slope in (("run A", 2.0), ("run B", -3.0)):
        ws = wb.create_sheet(title)
        ws.append(["dose (ug)", "response"])
        for v in range(1, 13):
            ws.append([v, 1.0 + slope * v + 0.01 * (v % 3)])
    buf = io.BytesIO()
    wb.save(buf)
    return buf.getvalue()


def test_a_workbook_offers_its_sheets_and_reads_another(fit_service):
    mime = "application/vnd.openxmlformats-officedocument.spreadsheetml.sheet"
    up = data.on_upload(fit_service, data_url(workbook(), mime), "runs.xlsx")["dataset"]
    assert up["sheet"] == "run A" and up["sheets"] == ["read me", "run A", "run B"]
    out = data.on_dataset(fit_service, up, "")
    assert out["sheet"] == "run A" and len(out["sheet_options"]) == 3 and out["sheet_style"] == data.SHOW
    assert data.on_sheet(fit_service, "run A", up) == {"dataset": no_update, "notice": no_update}
    b = data.on_sheet(fit_service, "run B", up)
    assert b["dataset"]["sheet"] == "run B" and "'run B'" in b["notice"]
    sel = fit_service.selection(b["dataset"]["id"], Columns("dose (ug)", "response"))
    assert sel.y[0] == pytest.approx(1.0 - 3.0 + 0.01)
    with pytest.raises(IntakeError):
        fit_service.load_sheet(b["dataset"]["id"], "no such sheet")
    plain = data.on_upload(fit_service, data_url(quad_csv()), "oven.csv")["dataset"]
    assert data.on_dataset(fit_service, plain, "")["sheet_style"] == data.HIDE
    with pytest.raises(IntakeError):
        data.on_sheet(fit_service, "run B", plain)


def test_a_pasted_block_with_decimal_commas_goes_through_intake(fit_service):
    pasted = "Spannung (V)\tStrom (mA)\n" + "\n".join(f"{v},5\t{2 * v + 1},25" for v in range(1, 11))
    out = data.on_paste(fit_service, 1, pasted)
    ds = out["dataset"]
    assert ds["name"] == PASTED_NAME and ds["decimal"] == "," and "10 rows" in out["notice"]
    sel = fit_service.selection(ds["id"], Columns("Spannung (V)", "Strom (mA)"))
    assert sel.x[:2].tolist() == [1.5, 2.5] and sel.y[0] == 3.25
    assert data.on_paste(fit_service, 0, pasted) == {"dataset": no_update, "notice": no_update}
    with pytest.raises(IntakeError):
        data.on_paste(fit_service, 2, "   ")
    with pytest.raises(FileTooLargeError, match="The pasted table is .* over this server's upload limit"):
        data.on_paste(new_service(limit=50), 1, pasted)


def test_a_view_of_another_sheet_reads_that_sheet_then_applies(fit_service):
    mime = "application/vnd.openxmlformats-officedocument.spreadsheetml.sheet"
    author = new_service()
    a = data.on_upload(author, data_url(workbook(), mime), "runs.xlsx")["dataset"]
    b = data.on_sheet(author, "run B", a)["dataset"]
    search = url_query(split_key(b, "dose (ug)", "response", None, None, "kfold", 25, 4, 0), 1)
    assert parse_query(search)["sheet"] == "run B"
    sample = fit_service.info(fit_service.sample_id())
    pending = data.on_dataset(fit_service, sample.to_store(), search)["pending"]
    up = data.on_upload(fit_service, data_url(workbook(), mime), "runs.xlsx")["dataset"]
    assert up["sheet"] == "run A"  # the engine's choice
    first = data.on_dataset(fit_service, up, "", pending)
    assert first["sheet"] == "run B" and first["pending"] == pending and first["x"] is no_update
    other = data.on_sheet(fit_service, first["sheet"], up)["dataset"]
    out = data.on_dataset(fit_service, other, "", first["pending"])
    assert (out["sheet"], out["mode"], out["folds"], out["degree"], out["pending"]) == ("run B", "kfold", 4, 1, None)


def test_one_row_left_out_reads_in_the_singular():
    assert text.rows_left_out_head("x", "y", 1).endswith("1 row is left out:")
    assert text.rows_left_out_head("x", "y", 2).endswith("2 rows are left out:")
    assert text.rows_dropped_note(1).startswith("1 row was left out")
    assert text.rows_dropped_note(3).startswith("3 rows were left out")
