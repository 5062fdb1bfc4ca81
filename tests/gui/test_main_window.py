"""The desktop application, offscreen (pytest-qt)."""

import pathlib

import numpy as np
import pytest

pytest.importorskip("PySide6")
from PySide6.QtCore import QPointF, QSettings, Qt  # noqa: E402
from PySide6.QtTest import QTest  # noqa: E402

from mwreach.coverage.geodesy import local_projection  # noqa: E402
from mwreach.coverage.inputs import load_study  # noqa: E402
from mwreach.coverage.study import Study  # noqa: E402

pytestmark = pytest.mark.gui
DEMO = pathlib.Path(__file__).parents[2] / "data" / "demo" / "quellmoor.toml"
ARTIFACTS = pathlib.Path(__file__).parents[1] / "artifacts"


@pytest.fixture
def window(qtbot, tmp_path, monkeypatch):
    from mwreach.gui.app import MainWindow

    # closing an edited study would ask; answer "discard" so no modal dialog blocks the tests
    monkeypatch.setattr("mwreach.gui.app.MainWindow._confirm_discard", lambda self: True)
    settings = QSettings(str(tmp_path / "settings.ini"), QSettings.IniFormat)
    win = MainWindow(settings)
    qtbot.addWidget(win)
    win.resize(1300, 850)
    win.show()
    yield win
    win.close()
    win.deleteLater()
    QTest.qWait(10)
    import gc

    gc.collect()  # finalise this window's Qt objects here, on the GUI thread


def _open_and_wait(qtbot, win, path=DEMO):
    with qtbot.waitSignal(win.computer.result, timeout=60_000,
                          check_params_cb=lambda req, res: req.bearings is None):
        assert win.open_path(str(path))
    return win.full_result


def test_radial_table_matches_study(qtbot, window):
    res = _open_and_wait(qtbot, window)
    ref = Study.from_file(DEMO).run(interference=False)
    for bearing in (0.0, 90.0, 137.5, 200.0):
        i = int(np.flatnonzero(ref.radials.bearings_deg == bearing)[0])
        for k, c in enumerate(ref.contours):
            d = c.first_km[i]
            expected = f"{d:.2f}" + ("*" if c.further[i] else "")
            assert window.radial_table.cell_value(bearing, k) == expected
    assert res.interference is not None
    window.results_tabs.setCurrentWidget(window.interference_view)  # filled when shown
    inter = res.interference
    extra = len(inter.neighbour_limits) + len(inter.overlaps)
    assert window.interference_table.rowCount() == len(inter.rows) + extra
    model = window.interference_table.model()
    # the overlap and night-limit checks come first, failures on top (the demo's third-adjacent
    # overlap fails), then the D/U rows with the worst margin first
    # the deciding columns first: check, neighbour, offset, margin, result, by
    assert model.index(0, 0).data() == "day overlap" and model.index(0, 4).data() == "FAILS"
    du = [i for i in range(model.rowCount())
          if model.index(i, 0).data() not in ("night limit entry", "day overlap")]
    first = model.index(du[0], 3).data()
    assert float(first) == pytest.approx(min(r.margin_db for r in inter.rows), abs=0.01)
    # above the table: the maximum day and night power with what limits each, as on the sheet
    from mwreach.coverage.report import describe_max_power

    header = window.interference_view.header.text()
    for period, mp in inter.max_power.items():
        assert describe_max_power(period, mp) in header
    assert "Maximum day power" in header and "Maximum night power" in header


def test_drag_site_moves_contours(qtbot, window):
    res = _open_and_wait(qtbot, window)
    m = window.map
    sx, sy = m.view.to_dev(0.0, 0.0)
    start = QPointF(float(sx), float(sy)).toPoint()
    dx_px = 40
    km = dx_px * m.view.km_per_unit
    QTest.mousePress(m, Qt.LeftButton, Qt.NoModifier, start)
    QTest.mouseMove(m, start + QPointF(dx_px / 2, 0).toPoint())
    with qtbot.waitSignal(window.computer.result, timeout=60_000,
                          check_params_cb=lambda req, r: req.bearings is None):
        QTest.mouseMove(m, start + QPointF(dx_px, 0).toPoint())
        QTest.mouseRelease(m, Qt.LeftButton, Qt.NoModifier, start + QPointF(dx_px, 0).toPoint())
    new = window.full_result
    st0, st1 = res.spec.station, new.spec.station
    from mwreach.coverage.geodesy import inverse

    d, az, _ = inverse(st0.lat, st0.lon, st1.lat, st1.lon)
    assert float(d) == pytest.approx(km, rel=0.05)  # moved by the dragged distance, due east
    assert float(az) == pytest.approx(90.0, abs=2.0)
    assert window.document.dirty
    # the contours moved: the 5 mV/m distance due west differs
    i = int(np.flatnonzero(new.radials.bearings_deg == 270.0)[0])
    assert new.contours[0].first_km[i] != pytest.approx(res.contours[0].first_km[i], abs=0.05)


def test_invalid_entry_is_refused_and_kept(qtbot, window):
    _open_and_wait(qtbot, window)
    before = window.document.spec
    edit = window.station_editor.edits["lat"]
    edit.setText("95")
    edit.editingFinished.emit()
    msg = window.station_editor.message.text()
    assert "lat must be >= -90 and <= 90 (got 95.0)" in msg
    assert window.document.spec is before  # study unchanged
    assert edit.text() == "95"  # what the user typed is kept
    edit.setText("abc")
    edit.editingFinished.emit()
    assert "lat must be a number (got 'abc')" in window.station_editor.message.text()


def test_save_reopen_compare(qtbot, window, tmp_path):
    _open_and_wait(qtbot, window)
    edit = window.station_editor.edits["power_day_kw"]
    with qtbot.waitSignal(window.computer.result, timeout=60_000,
                          check_params_cb=lambda req, r: req.bearings is None):
        edit.setText("2.5")
        edit.editingFinished.emit()
    target = tmp_path / "sub" / "copy.toml"
    target.parent.mkdir()
    assert window._save_to(str(target))
    assert not window.document.dirty
    again = load_study(target)  # relative file names were rewritten for the new folder
    assert again.station.power_day_kw == 2.5
    orig = load_study(DEMO)
    assert again.levels == orig.levels and len(again.ground.zones) == len(orig.ground.zones)
    assert again.interference.neighbours == orig.interference.neighbours


def test_units_are_remembered(qtbot, window, tmp_path):
    _open_and_wait(qtbot, window)
    window.set_units("mi")
    assert window.settings.value("units/distance") == "mi"
    assert "[mi]" in window.radial_table.header_text(0)


def test_unit_switch_changes_every_header_and_check_mark(qtbot, window):
    _open_and_wait(qtbot, window)
    window.set_units("km")
    window.act_mvm.trigger()  # fields in mV/m, as from the View menu
    assert window.act_mvm.isChecked() and not window.act_dbu.isChecked()
    window.results_tabs.setCurrentWidget(window.interference_view)
    t = window.interference_table
    heads = [t.header_text(i) for i in range(t.model().columnCount())]
    assert "Wanted mV/m" in heads and "Unwanted mV/m" in heads
    assert not any("dBµV/m" in h for h in heads)
    window.results_tabs.setCurrentWidget(window.profile)
    assert "mV/m" in window.profile.plot.getAxis("left").labelText
    window.act_dbu.trigger()
    window.results_tabs.setCurrentWidget(window.interference_view)
    heads = [t.header_text(i) for i in range(t.model().columnCount())]
    assert "Wanted dBµV/m" in heads and not any(h.endswith(" mV/m") for h in heads[6:8])
    window.act_mi.trigger()
    assert window.act_mi.isChecked() and not window.act_km.isChecked()
    window.results_tabs.setCurrentWidget(window.radial_table)
    r = window.radial_table
    heads = [r.header_text(i) for i in range(r.model().columnCount())]
    assert all("[mi]" in h for h in heads) and not any("[km]" in h for h in heads)
    window.set_units("km")


def test_screenshot_not_blank(qtbot, window):
    _open_and_wait(qtbot, window)
    qtbot.wait(50)
    img = window.grab().toImage()
    ARTIFACTS.mkdir(exist_ok=True)
    img.save(str(ARTIFACTS / "main_window.png"))
    colours = {img.pixel(x, y) for x in range(0, img.width(), 11) for y in range(0, img.height(), 11)}
    assert len(colours) > 30
    # the shown radial table at 180°, where the demo's radial stays on its default ground
    # (4 mS/m, εr 15) past the 0.5 mV/m contour: the homogeneous smooth-earth curve gives it
    # (its ground wave is checked against mpmath in tests/test_groundwave.py)
    from mwreach.coverage import groundwave as gw

    spec = window.document.spec
    res = window.full_result
    i = int(np.flatnonzero(res.radials.bearings_deg == 180.0)[0])
    k = [c.level_mv_m for c in res.contours].index(0.5)
    expected = gw.model(spec.station.freq_khz, spec.ground.default, spec.earth_k) \
        .distance_to_field_km(0.5, res.radials.e1km_mv_m[i])
    assert float(window.radial_table.cell_value(180.0, k)) == pytest.approx(expected, abs=0.01)


def test_worker_error_reaches_the_window(qtbot, window, monkeypatch):
    _open_and_wait(qtbot, window)
    from mwreach.gui import worker as wk

    def boom(self, *a, **k):
        raise ValueError("synthetic failure for the test")

    monkeypatch.setattr(wk.Study, "run", boom)
    monkeypatch.setattr("mwreach.gui.app.QMessageBox.warning", lambda *a, **k: None)
    with qtbot.waitSignal(window.computer.error, timeout=30_000):
        window.computer.submit(window.document.spec)
    assert "synthetic failure" in window.error_label.text()


def test_cli_screenshot(tmp_path):
    import os
    import subprocess
    import sys

    out = tmp_path / "window.png"
    env = dict(os.environ, QT_QPA_PLATFORM="offscreen")
    proc = subprocess.run([sys.executable, "-m", "mwreach.coverage.cli", "gui", str(DEMO),
                           "--screenshot", str(out)], env=env, capture_output=True, text=True,
                          timeout=180)
    assert proc.returncode == 0, proc.stderr
    from PySide6.QtGui import QImage

    img = QImage(str(out))
    assert img.width() > 800 and img.height() > 500


def test_neighbour_table_edit_and_csv_import(qtbot, window, demo_copy):
    _open_and_wait(qtbot, window)
    ed = window.neighbours_editor
    n_before = len(window.document.spec.interference.neighbours)
    # a new row is refused until complete, and what was typed stays
    ed._add()
    row = ed.table.rowCount() - 1
    from PySide6.QtWidgets import QTableWidgetItem

    ed.table.setItem(row, 0, QTableWidgetItem("Test Neighbour"))
    assert "missing key 'lat'" in ed.message.text()
    assert ed.table.item(row, 0).text() == "Test Neighbour"
    for col, v in ((1, "39.0"), (2, "-48.0"), (3, "1390"), (4, "1"), (6, "90")):
        ed.table.setItem(row, col, QTableWidgetItem(v))
    assert ed.message.text() == ""
    names = [n.name for n in window.document.spec.interference.neighbours]
    assert "Test Neighbour" in names and len(names) == n_before + 1
    # importing another CSV replaces the file's neighbours
    csv = demo_copy / "other.csv"
    csv.write_text("name,lat,lon,freq_khz,power_day_kw,height_deg\nFar Away,45,-40,1390,1,90\n")
    assert ed.import_csv(str(csv))
    names = [n.name for n in window.document.spec.interference.neighbours]
    assert "Far Away" in names and "Sennick Coast AM" not in names


def test_refused_table_edit_survives_other_edits(qtbot, window):
    _open_and_wait(qtbot, window)
    from PySide6.QtWidgets import QTableWidgetItem

    lv = window.levels_editor
    lv.table.setItem(0, 0, QTableWidgetItem("-5"))
    assert "field_mv_m must be" in lv.message.text()
    # a valid edit elsewhere refreshes the editors; the refused cell keeps what was typed
    edit = window.station_editor.edits["power_night_kw"]
    edit.setText("0.3")
    edit.editingFinished.emit()
    assert window.document.spec.station.power_night_kw == 0.3
    assert lv.table.item(0, 0).text() == "-5"


def test_cancel_stops_a_run(qtbot, window):
    _open_and_wait(qtbot, window)
    got = []
    window.computer.result.connect(lambda req, res: got.append(req))
    with qtbot.waitSignal(window.computer.idle, timeout=30_000):
        window.computer.submit(window.document.spec)
        window.computer.cancel()
    qtbot.wait(200)
    assert got == []  # the cancelled run delivered nothing
    assert not window.progress.isVisible()


def test_antenna_editor_shows_physical_height(qtbot, window):
    _open_and_wait(qtbot, window)
    # the demo tower is 62.0 m (study file height_m); a quarter wave at 1390 kHz is 53.9 m
    text = window.antenna_editor.heights.text()
    assert "62.0 m" in text and "53.9 m" in text


def _study_with_tower(folder, tower_lines):
    text = DEMO.read_text(encoding="utf-8").replace("height_m = 62.0             # about 103 "
                                                    "electrical degrees at 1390 kHz\nloss_ohm = 1.0",
                                                    tower_lines)
    assert tower_lines in text
    f = folder / "tower.toml"
    f.write_text(text, encoding="utf-8")
    return f


def test_tower_edit_changes_only_the_edited_key(qtbot, window, demo_copy):
    from PySide6.QtWidgets import QTableWidgetItem

    f = _study_with_tower(demo_copy, "height_m = 62.0\nefficiency = 0.9")
    _open_and_wait(qtbot, window, f)
    ed = window.antenna_editor
    cols = [k for k, _ in ed.COLUMNS]
    assert ed.table.item(0, cols.index("height_m")).text() == "62"
    ed.table.setItem(0, cols.index("phase_deg"), QTableWidgetItem("10"))
    assert ed.message.text() == ""
    tower = window.document.doc["antenna"]["tower"][0]
    assert tower == {"height_m": 62.0, "efficiency": 0.9, "phase_deg": 10.0}
    # entering degrees replaces the metres (one height per tower)
    ed.table.setItem(0, cols.index("height_deg"), QTableWidgetItem("90"))
    assert window.document.doc["antenna"]["tower"][0] == {"height_deg": 90.0, "efficiency": 0.9,
                                                          "phase_deg": 10.0}


def test_neighbour_with_height_m_is_editable(qtbot, window):
    from PySide6.QtWidgets import QTableWidgetItem

    _open_and_wait(qtbot, window)
    ed = window.neighbours_editor
    cols = [k for k, _ in ed.COLUMNS]
    ed.table.setItem(0, cols.index("height_m"), QTableWidgetItem("70"))
    assert ed.message.text() == ""
    t = window.document.doc["neighbour"][0]
    assert t["height_m"] == 70.0 and "array" not in t and t["name"] == "Varnholt Radio"


@pytest.mark.parametrize("title", ["line one\nline two", "bell \u0001 and delete \u007f",
                                   'quote " back\\slash \t tab'])
def test_control_characters_in_text_are_refused_at_the_field(qtbot, window, title):
    # they would break the KML, the CSVs and file names: refused like any bad value
    _open_and_wait(qtbot, window)
    err = window.document.try_update(lambda d: d["study"].__setitem__("title", title))
    assert err is not None and "title must not contain control characters" in err


def test_save_reopen_text_with_quotes_and_backslashes(qtbot, window, tmp_path):
    title = 'quote " back\\slash \\t and \u00e9\u00b5 \U0001f4fb'
    _open_and_wait(qtbot, window)
    assert window.document.try_update(lambda d: d["study"].__setitem__("title", title)) is None
    target = tmp_path / "ctl.toml"
    assert window._save_to(str(target))
    assert load_study(target).title == title


def test_save_that_would_not_read_back_keeps_the_old_file(qtbot, window, tmp_path, monkeypatch):
    _open_and_wait(qtbot, window)
    target = tmp_path / "keep.toml"
    assert window._save_to(str(target))
    before = target.read_bytes()
    warnings = []
    monkeypatch.setattr("mwreach.gui.app.QMessageBox.warning",
                        lambda *a: warnings.append(a[2]))
    monkeypatch.setattr("mwreach.gui.document.dump_toml_keeping",
                        lambda doc, original: "title = = broken\n")
    assert not window._save_to(str(target))
    assert target.read_bytes() == before
    assert "not saved; the written text does not read back" in warnings[0]
    assert not [p for p in tmp_path.iterdir() if p.name.startswith(".")]


def test_date_value_is_refused_at_the_field(qtbot, window):
    import datetime

    _open_and_wait(qtbot, window)
    err = window.document.try_update(
        lambda d: d["study"].__setitem__("title", datetime.date(2026, 1, 2)))
    assert "title must be text in quotes (got the date/time 2026-01-02)" in err


def test_open_and_export_errors_show_a_dialog(qtbot, window, tmp_path, monkeypatch):
    warnings = []
    monkeypatch.setattr("mwreach.gui.app.QMessageBox.warning",
                        lambda *a: warnings.append((a[1], a[2])))
    assert not window.open_path(str(tmp_path / "missing.toml"))
    assert warnings[-1][0] == "Cannot open study" and "not found" in warnings[-1][1]
    _open_and_wait(qtbot, window)
    blocker = tmp_path / "afile"
    blocker.write_text("x")
    assert not window.export_files(str(blocker / "sub"))
    assert warnings[-1][0] == "Cannot export"
    assert not window.export_sheet(str(blocker / "sheet.pdf"))
    assert warnings[-1][0] == "Cannot write the contour sheet"
    assert blocker.read_text() == "x"


def test_site_search_heat_layer_and_click_to_move(qtbot, window):
    _open_and_wait(qtbot, window)
    window.start_search(12.0, 6.0)
    qtbot.waitUntil(lambda: window.last_search is not None, timeout=120_000)
    search = window.last_search
    assert search.candidates and window.map.options.heat is not None
    assert window.map.options.heat.x_km.size == len(search.candidates)
    # click a candidate's square (one away from the site symbol, which a press would drag):
    # the site moves there and the full study runs
    st = window.document.spec.station
    proj = local_projection(st.lat, st.lon)
    for best in search.candidates:
        x, y = proj.to_xy(best.lon, best.lat)
        dx, dy = window.map.view.to_dev(x, y)
        sx, sy = window.map.view.to_dev(0.0, 0.0)
        if np.hypot(dx - sx, dy - sy) > 30:
            break
    with qtbot.waitSignal(window.computer.result, timeout=60_000,
                          check_params_cb=lambda req, res: req.bearings is None):
        QTest.mouseClick(window.map, Qt.LeftButton, pos=QPointF(float(dx), float(dy)).toPoint())
    moved = window.document.spec.station
    assert (moved.lat, moved.lon) == pytest.approx((best.lat, best.lon), abs=1e-6)


def test_band_view_shows_channels_and_click_moves_the_study(qtbot, window):
    _open_and_wait(qtbot, window)
    window.start_channels(1370.0, 1410.0)
    qtbot.waitUntil(lambda: window.last_channels is not None, timeout=120_000)
    summary = window.last_channels
    assert [r["freq_khz"] for r in summary["channels"]] == [1370.0, 1380.0, 1390.0, 1400.0,
                                                            1410.0]
    view = window.band_view
    qtbot.waitExposed(view)
    view.repaint()
    # the bars stand where the layout says; a click on the fourth channel moves the study there
    x = view.layout_.x(3)
    assert view.row_at(x)["freq_khz"] == 1400.0
    with qtbot.waitSignal(window.computer.result, timeout=60_000,
                          check_params_cb=lambda req, res: req.bearings is None):
        QTest.mouseClick(view, Qt.LeftButton, pos=QPointF(x, view.height() / 2).toPoint())
    assert window.document.spec.station.freq_khz == 1400.0
    assert window.full_result.spec.station.freq_khz == 1400.0
    window.channels_window.close()


def test_ground_editor_sets_a_range_and_draws_the_bands(qtbot, window):
    _open_and_wait(qtbot, window)
    ed = window.ground_editor
    ed.sigma_range.setText("9, 2")  # lo above hi: refused, the field marked, the study kept
    ed._range()
    assert "Not applied" in ed.message.text() and ed.sigma_range.styleSheet()
    assert window.document.spec.ground.default_range == (2.0, 8.0)
    ed.sigma_range.setText("3, 6")
    ed._range()
    assert window.document.spec.ground.default_range == (3.0, 6.0)
    assert window.document.spec.uncertainty is None
    with qtbot.waitSignal(window.computer.result, timeout=120_000,
                          check_params_cb=lambda req, res: req.bearings is None):
        ed.bands.setChecked(True)
    assert window.document.spec.uncertainty.draws == 200
    assert window.full_result.bands and len(window.full_result.bands) == 4
    assert ed.zones.item(0, 3).text() == "0.25–1"  # the uplands' range, from the zones file
    ed.bands.setChecked(False)
    assert "uncertainty" not in window.document.doc


def test_exposure_layer_draws_the_screening_of_the_day_antenna(qtbot, window):
    from mwreach.coverage.exposure import screening

    _open_and_wait(qtbot, window)
    window.act_exposure.setChecked(True)
    window.toggle_exposure()
    qtbot.waitUntil(lambda: window.last_exposure is not None, timeout=60_000)
    data = window.last_exposure
    assert window.map.options.exposure is data
    # the same screening as the core's (the window draws, never computes, it)
    ref = screening(window.document.spec, "day", 2.0, max_m=300.0, grid=False, profile=False,
                    far_step_m=5.0)
    assert data["standards"] == ref["standards"]
    assert "RF exposure" in window.statusBar().currentMessage()
    window.map.repaint()  # draws without error, boundaries or not
    window.act_exposure.setChecked(False)
    window.toggle_exposure()
    assert window.map.options.exposure is None


def test_measurements_view_fits_and_accepts(qtbot, window, demo_copy):
    import shutil

    for f in ("quellmoor.toml", "measurements.csv"):
        shutil.copy(DEMO.parent / f, demo_copy / f)
    _open_and_wait(qtbot, window, demo_copy / "quellmoor.toml")
    view = window.measurements
    window.results_tabs.setCurrentWidget(view)
    with qtbot.waitSignal(window.computer.result, timeout=120_000,
                          check_params_cb=lambda req, res: req.bearings is None):
        view.import_and_fit(str(demo_copy / "measurements.csv"))
        qtbot.waitUntil(lambda: bool(view.fits), timeout=60_000)
        assert view.table.rowCount() == 3 and view.table.item(0, 0).text() == "south"
        # the demo readings were made with σ = 6 mS/m (data/demo/make_measurements.py)
        sigma = view.fitted_sigma()
        assert 4.5 < sigma < 8.0
        assert view.accept_sigma() is None
    assert window.document.doc["ground"]["sigma_ms_m"] == pytest.approx(round(sigma, 4))
    img = view.plot.grab().toImage()
    assert len({img.pixel(x, y) for x in range(0, img.width(), 7)
                for y in range(0, img.height(), 7)}) > 5  # the plot is drawn


def test_every_input_control_reachable_and_headers_whole_at_1280x720(qtbot, window):
    from PySide6.QtWidgets import (QAbstractButton, QComboBox, QLineEdit, QScrollArea,
                                   QTabWidget, QTableWidget)

    window.resize(1280, 720)
    _open_and_wait(qtbot, window)
    qtbot.wait(50)
    # the window fits a 1280×720 screen: its least height is below 720 px, and it takes it
    assert window.minimumSizeHint().height() <= 720
    assert window.height() <= 720
    tabs = next(t for t in window.findChildren(QTabWidget)
                if t.count() == 6 and t.tabText(0) == "Station")
    bar = tabs.tabBar()
    for k in range(tabs.count()):  # every tab in view, none behind scroll arrows
        assert bar.tabRect(k).intersects(bar.rect()) and bar.rect().contains(bar.tabRect(k))
        tabs.setCurrentIndex(k)
        qtbot.wait(10)
        scroll = tabs.currentWidget()
        assert isinstance(scroll, QScrollArea)
        editor = scroll.widget()
        for w in editor.findChildren(QAbstractButton) + editor.findChildren(QLineEdit) \
                + editor.findChildren(QComboBox) + editor.findChildren(QTableWidget):
            if not w.isVisibleTo(editor):
                continue
            scroll.ensureWidgetVisible(w)
            qtbot.wait(1)
            assert not w.visibleRegion().isEmpty(), (tabs.tabText(k), w.objectName() or w)
        for table in editor.findChildren(QTableWidget):
            head = table.horizontalHeader()
            fm = head.fontMetrics()
            for c in range(table.columnCount()):
                text = table.horizontalHeaderItem(c).text()
                widest = max(fm.horizontalAdvance(line) for line in text.split("\n"))
                assert head.sectionSize(c) >= widest, (tabs.tabText(k), text)


def test_drag_preview_keeps_up_with_a_fast_mouse(qtbot, window):
    # the behaviour, not the timing (that is benchmarks/bench_gui.py): while a preview is in
    # flight, newer positions wait and only the newest goes next; previews arrive while the
    # mouse is still down, and the last one shown is at the last position
    _open_and_wait(qtbot, window)
    st = window.document.spec.station
    submitted, shown = [], []
    real_submit = window.computer.submit

    def spy(spec, bearings=None, **kw):
        if bearings is not None:
            submitted.append((spec.station.lat, spec.station.lon))
        return real_submit(spec, bearings=bearings, **kw)

    window.computer.submit = spy
    window.computer.result.connect(
        lambda req, res: shown.append((req.spec.station.lat, req.spec.station.lon))
        if req.bearings is not None else None)
    window.map._drag = ("site", QPointF(0, 0), (0.0, 0.0))  # as during a real drag
    pos = [(st.lat + 0.001 * k, st.lon) for k in range(1, 6)]
    for p in pos[:4]:  # four moves before the first preview can be back
        window._on_site_drag(*p)
    assert submitted == [pos[0]]  # one preview at a time; the others wait
    qtbot.waitUntil(lambda: len(shown) >= 1, timeout=30_000)
    assert shown[0] == pos[0]
    qtbot.waitUntil(lambda: len(submitted) == 2, timeout=30_000)
    assert submitted[1] == pos[3]  # the newest waiting position went next; 2 and 3 dropped
    window._on_site_drag(*pos[4])
    qtbot.waitUntil(lambda: shown and shown[-1] == pos[4], timeout=30_000)
    assert window.map._drag is not None  # all of it while the mouse is still down
    assert submitted == [pos[0], pos[3], pos[4]]
    window.map._drag = None


def _flat(value, path=()):
    """{path: leaf} of a parsed TOML document, lists indexed."""
    if isinstance(value, dict):
        out = {}
        for k, v in value.items():
            out.update(_flat(v, path + (k,)))
        return out
    if isinstance(value, list) and any(isinstance(v, dict) for v in value):
        out = {}
        for i, v in enumerate(value):
            out.update(_flat(v, path + (i,)))
        return out
    return {path: value}


def _edit_line(widget, text):
    widget.setText(text)
    widget.editingFinished.emit()


def _edit_cell(table, row, col, text):
    from PySide6.QtWidgets import QTableWidgetItem

    table.setItem(row, col, QTableWidgetItem(text))


EDITS = {  # editor tab → (edit made through its widgets, the one key it must change)
    "station": (lambda w: _edit_line(w.station_editor.edits["power_day_kw"], "2"),
                {("station", "power_day_kw"): 2}),
    "title": (lambda w: _edit_line(w.station_editor.title, "Retitled"),
              {("study", "title"): "Retitled"}),
    "antenna": (lambda w: _edit_cell(w.antenna_editor.table, 0, 7, "2"),
                {("antenna", "tower", 0, "loss_ohm"): 2}),
    "rotation": (lambda w: _edit_line(w.antenna_editor.rotation, "15"),
                 {("antenna", "rotation_deg"): 15}),
    "ground": (lambda w: _edit_line(w.ground_editor.sigma, "5"), {("ground", "sigma_ms_m"): 5}),
    "contours": (lambda w: _edit_cell(w.levels_editor.table, 1, 1, "primary"),
                 {("contour", 1, "label"): "primary"}),
    "neighbours": (lambda w: _edit_cell(w.neighbours_editor.table, 0, 4, "3"),
                   {("neighbour", 0, "power_day_kw"): 3}),
    "night": (lambda w: _edit_line(w.night_editor.floor, "0.4"), {("night", "floor_mv_m"): 0.4}),
    "ratios": (lambda w: _edit_cell(w.night_editor.ratios, 1, 1, "7"),
               {("protection", "night_adjacent_1_db"): 7}),
}


@pytest.mark.parametrize("tab", sorted(EDITS))
def test_an_edit_changes_only_what_was_edited(qtbot, window, tmp_path, tab):
    # a study with keys no editor shows (the plan, the night layer height, comments): after one
    # edit in one tab, save and reopen; every other value of every table is as it was
    import shutil
    import tomllib

    for f in DEMO.parent.iterdir():
        if f.suffix in (".geojson", ".csv", ".toml"):
            shutil.copy(f, tmp_path / f.name)
    study = tmp_path / "quellmoor.toml"
    text = study.read_text(encoding="utf-8").replace(
        "raster_khz = 10\n", 'plan = "region2"\nraster_khz = 10\n')
    study.write_text(text, encoding="utf-8")
    before = _flat(tomllib.loads(text))
    _open_and_wait(qtbot, window, study)
    edit, expected = EDITS[tab]
    edit(window)
    for key, value in expected.items():
        assert key not in before or before[key] != value  # the edit is a change
    editor_messages = [e.message.text() for e in window.editors]
    assert not any(editor_messages), editor_messages
    window.document.save()
    after = _flat(tomllib.loads(study.read_text(encoding="utf-8")))
    changed = {k: after.get(k) for k in set(before) | set(after) if before.get(k) != after.get(k)}
    assert changed == expected
    assert after[("protection", "plan")] == "region2"
    assert load_study(study).interference.protection.plan == "region2"


def test_save_as_onto_a_file_the_study_reads_is_refused(qtbot, window, tmp_path, monkeypatch):
    import shutil

    for f in DEMO.parent.iterdir():
        if f.suffix in (".geojson", ".csv", ".toml"):
            shutil.copy(f, tmp_path / f.name)
    _open_and_wait(qtbot, window, tmp_path / "quellmoor.toml")
    warnings = []
    monkeypatch.setattr("mwreach.gui.app.QMessageBox.warning",
                        lambda *a: warnings.append(a[2]))
    for name in ("zones.geojson", "community.geojson", "neighbours.csv",
                 "varnholt_array.toml"):
        before = (tmp_path / name).read_bytes()
        assert not window._save_to(str(tmp_path / name))
        assert (tmp_path / name).read_bytes() == before
        assert "the study reads that file" in warnings[-1]
    assert window._save_to(None)  # the study itself may be saved over


def test_comments_and_layout_survive_a_save(qtbot, window, tmp_path):
    import shutil

    for f in DEMO.parent.iterdir():
        if f.suffix in (".geojson", ".csv", ".toml"):
            shutil.copy(f, tmp_path / f.name)
    study = tmp_path / "quellmoor.toml"
    original = study.read_text(encoding="utf-8")
    _open_and_wait(qtbot, window, study)
    _edit_line(window.station_editor.edits["power_day_kw"], "2")
    assert window._save_to(None)
    saved = study.read_text(encoding="utf-8")
    comments = [ln for ln in original.splitlines() if "#" in ln]
    for line in comments:
        if "power_day_kw" in line:
            continue
        assert line in saved, line  # every other commented line exactly as written
    assert "power_day_kw = 2" in saved and "power_day_kw = 1.0" not in saved
    assert saved.count("\n") == original.count("\n")
    # and a save into another folder rewrites only the file names
    other = tmp_path / "sub"
    other.mkdir()
    assert window._save_to(str(other / "copy.toml"))
    text = (other / "copy.toml").read_text(encoding="utf-8")
    assert 'zones = "../zones.geojson"' in text and "# default ground outside the zones" in text
    assert load_study(other / "copy.toml").ground.default.sigma_ms_m == 4.0


def test_export_refuses_to_write_over_a_file_the_study_reads(qtbot, window, demo_copy,
                                                             monkeypatch):
    # the window's Export goes through the same writer as the command line: an output name
    # equal to one of the study's inputs (here its neighbours list, saved as interference.csv)
    # is refused with a dialog, and the input is left as it was
    import shutil

    warnings = []
    monkeypatch.setattr("mwreach.gui.app.QMessageBox.warning",
                        lambda *a: warnings.append((a[1], a[2])))
    shutil.copy(DEMO, demo_copy / "quellmoor.toml")
    (demo_copy / "neighbours.csv").rename(demo_copy / "interference.csv")
    study = demo_copy / "quellmoor.toml"
    study.write_text(study.read_text().replace('"neighbours.csv"', '"interference.csv"'))
    before = (demo_copy / "interference.csv").read_bytes()
    assert window.open_path(str(study))
    qtbot.waitUntil(lambda: window.full_result is not None, timeout=60_000)
    assert not window.export_files(str(demo_copy))
    assert warnings and warnings[-1][0] == "Cannot export"
    assert "interference.csv" in warnings[-1][1]
    assert (demo_copy / "interference.csv").read_bytes() == before
    assert not (demo_copy / "summary.json").exists()  # nothing of the set was placed


def test_antenna_tab_edits_each_period_and_its_augmentations(qtbot, window):
    from PySide6.QtWidgets import QTableWidgetItem

    _open_and_wait(qtbot, window)
    ed = window.antenna_editor
    ed.period_box.setCurrentIndex(ed.period_box.findData("night"))
    assert ed.table.rowCount() == 2  # the demo's night array
    assert ed.augmentations.isVisible() or ed.augmentations.isVisibleTo(ed)
    assert ed.augmentations.table.rowCount() == 1
    cols = [k for k, _ in ed.augmentations.COLUMNS]
    ed.augmentations.table.setItem(0, cols.index("field_mv_m"), QTableWidgetItem("320"))
    assert ed.augmentations.message.text() == ""
    assert window.document.doc["antenna_night"]["augmentation"][0]["field_mv_m"] == 320.0
    aug = window.document.spec.station.night_antenna
    assert aug.field_mv_m(160.0, 0.0, 0.5) == pytest.approx(320.0)  # 73.152: the filed field
    # an augmentation below the pattern is refused in one line and the study keeps the old one
    ed.augmentations.table.setItem(0, cols.index("field_mv_m"), QTableWidgetItem("5"))
    assert "A > 0" in ed.augmentations.message.text()
    assert window.document.doc["antenna_night"]["augmentation"][0]["field_mv_m"] == 320.0
    # critical hours: no antenna of their own, then one copied from the day's towers
    ed.augmentations.message.setText("")
    ed.period_box.setCurrentIndex(ed.period_box.findData("critical"))
    assert not ed.table.isEnabled() and "uses the day antenna" in ed.own_label.text()
    ed.own_btn.click()
    assert "antenna_critical" in window.document.doc and ed.table.isEnabled()
    assert window.document.spec.station.has_own("critical")


def test_pattern_view_overlays_theoretical_standard_and_augmented(qtbot, window):
    res = _open_and_wait(qtbot, window)
    view = window.pattern
    window.results_tabs.setCurrentWidget(view)  # filled when shown
    view.period_box.setCurrentIndex(view.period_box.findData("night"))
    st = res.spec.station
    rad = st.night_antenna
    assert set(view.curves) == {"theoretical", "standard", "augmented"}
    az = np.arange(360.0)
    # the view's curves are the core's numbers (the GUI computes no physics of its own)
    assert view.curves["augmented"] == pytest.approx(rad.field_mv_m(az, 0.0, 0.5))
    assert view.curves["theoretical"] == pytest.approx(rad.array.field_mv_m(az, 0.0, 0.5))
    assert np.all(view.curves["standard"] >= view.curves["theoretical"])
    assert np.all(view.curves["augmented"] >= view.curves["standard"] - 1e-9)
    assert "standard pattern RMS" in view.caption.text()
    view.period_box.setCurrentIndex(view.period_box.findData("day"))
    assert set(view.curves) == {"theoretical"}  # one tower: no standard pattern


def test_compare_the_open_study_with_a_saved_one(qtbot, window):
    _open_and_wait(qtbot, window)
    after = DEMO.parent / "quellmoor_after.toml"
    comp = window.compare_with(str(after), show=True)
    # the open demo against the changed one saved beside it: the same numbers as the command
    from mwreach.coverage.compare import compare_results

    ref = compare_results(Study.from_file(after).run(interference=False),
                          Study.from_file(DEMO).run(interference=False))
    assert [r["gain_km2"] for r in comp["levels"]] == pytest.approx(
        [r["gain_km2"] for r in ref["levels"]], rel=1e-9)
    assert comp["levels"][0]["gain_population"] > 0
    assert window.compare_window.isVisible()
