"""The desktop application: map, editors, result views, background computation."""

from __future__ import annotations

import pathlib
import sys

import numpy as np
from PySide6.QtCore import QSettings, Qt, QTimer
from PySide6.QtGui import QAction, QActionGroup, QKeySequence
from PySide6.QtWidgets import (
    QDockWidget,
    QFileDialog,
    QLabel,
    QMainWindow,
    QMessageBox,
    QProgressBar,
    QPushButton,
    QScrollArea,
    QTabWidget,
    QVBoxLayout,
    QWidget,
)

from mwreach.coverage.export import KM_PER_MI, write_outputs
from mwreach.coverage.geodesy import inverse, local_projection
from mwreach.coverage.safefiles import atomic_write

from .document import StudyDocument
from .mapwidget import MapWidget
from .panels import (
    AntennaEditor,
    GroundEditor,
    InterferenceTable,
    LevelsEditor,
    NeighboursEditor,
    NightEditor,
    PatternPlot,
    ProfilePlot,
    RadialTable,
    StationEditor,
)
from .panels import max_power_text
from .qt import ensure_app, png_bytes
from .sheet import CAUTIONS
from .worker import Computer

__all__ = ["MainWindow", "run_gui"]

COARSE_BEARINGS = np.arange(0.0, 360.0, 5.0)  # 72 radials while dragging the site
MAX_RECENT = 8


def _with_header(table):
    """The interference table under a line per period with the maximum power and its limit."""
    box = QWidget()
    lay = QVBoxLayout(box)
    lay.setContentsMargins(0, 0, 0, 0)
    box.header = QLabel()
    box.header.setWordWrap(True)
    box.header.setTextInteractionFlags(Qt.TextSelectableByMouse)
    box.header.setContentsMargins(6, 4, 6, 4)
    lay.addWidget(box.header)
    lay.addWidget(table, 1)
    return box


class MainWindow(QMainWindow):
    def __init__(self, settings: QSettings | None = None):
        super().__init__()
        self.settings = settings or QSettings("mwreach", "mwreach")
        self.document = StudyDocument(self)
        self.computer = Computer(self)
        self.result = None  # latest full or coarse result shown
        self.full_result = None  # latest full result (tables, sheet, exports)
        self.units = self.settings.value("units/distance", "km")
        self.field_units = self.settings.value("units/field", "dBu")

        self.map = MapWidget()
        self.map.set_units(self.units)
        self.setCentralWidget(self.map)
        self._build_docks()
        self._build_menus()
        self._build_status()

        self.document.changed.connect(self._recompute)
        self.document.dirtyChanged.connect(lambda _d: self._update_title())
        self.document.pathChanged.connect(lambda _p: self._update_title())
        self.computer.result.connect(self._on_result)
        self.computer.error.connect(self._on_error)
        self.computer.progress.connect(self._on_progress)
        self.computer.idle.connect(self._on_idle)
        self.map.siteDragged.connect(self._on_site_drag)
        self.map.siteDropped.connect(self._on_site_drop)
        self.map.hovered.connect(self._on_hover)
        self.map.candidateClicked.connect(self._on_candidate)
        self.search_thread = None
        self.channel_thread = None
        self.last_channels = None
        self.exposure_thread = None
        self.last_exposure = None
        self.last_search = None
        self._coarse_busy = False  # a drag preview is being computed
        self._coarse_pending = None  # the newest dragged position waiting for it
        self.resize(1400, 900)
        self._update_title()

    # --- construction -------------------------------------------------------------------------
    def _build_docks(self):
        self.station_editor = StationEditor(self.document)
        self.antenna_editor = AntennaEditor(self.document)
        self.ground_editor = GroundEditor(self.document)
        self.levels_editor = LevelsEditor(self.document)
        self.neighbours_editor = NeighboursEditor(self.document)
        self.night_editor = NightEditor(self.document)
        self.editors = [self.station_editor, self.antenna_editor, self.ground_editor,
                        self.levels_editor, self.neighbours_editor, self.night_editor]
        inputs = QTabWidget()
        inputs.setTabPosition(QTabWidget.West)  # all six tabs in view at any width
        # the inputs take the full height on the right; the results sit left of them
        self.setCorner(Qt.BottomRightCorner, Qt.RightDockWidgetArea)
        for w, name in zip(self.editors, ("Station", "Antenna", "Ground", "Contours",
                                          "Neighbours", "Night && ratios")):
            scroll = QScrollArea()
            scroll.setWidgetResizable(True)
            scroll.setWidget(w)
            inputs.addTab(scroll, name)
        dock = QDockWidget("Study inputs", self)
        dock.setObjectName("inputs")
        dock.setWidget(inputs)
        self.addDockWidget(Qt.RightDockWidgetArea, dock)

        self.radial_table = RadialTable()
        self.profile = ProfilePlot()
        self.pattern = PatternPlot()
        self.interference_table = InterferenceTable()
        self.interference_view = _with_header(self.interference_table)
        self.results_tabs = QTabWidget()
        self.results_tabs.addTab(self.radial_table, "Radial distances")
        self.results_tabs.addTab(self.profile, "Field along a bearing")
        self.results_tabs.addTab(self.pattern, "Antenna pattern")
        self.results_tabs.addTab(self.interference_view, "Interference checks")
        from .measurements import MeasurementsView

        self.measurements = MeasurementsView(self.document)
        # in a scroll area, so that its buttons and plot never set the window's least height
        meas_scroll = QScrollArea()
        meas_scroll.setWidgetResizable(True)
        meas_scroll.setWidget(self.measurements)
        self.results_tabs.addTab(meas_scroll, "Measurements")
        self._stale_views: set[int] = set()
        self.results_tabs.currentChanged.connect(self._refresh_view)
        rdock = QDockWidget("Results", self)
        rdock.setObjectName("results")
        rdock.setWidget(self.results_tabs)
        self.addDockWidget(Qt.BottomDockWidgetArea, rdock)
        self.resizeDocks([rdock], [250], Qt.Vertical)
        self.resizeDocks([dock], [430], Qt.Horizontal)

    def _action(self, menu, text, slot, shortcut=None):
        a = QAction(text, self)
        if shortcut:
            a.setShortcut(shortcut)
        a.triggered.connect(slot)
        menu.addAction(a)
        return a

    def _build_menus(self):
        mb = self.menuBar()
        f = mb.addMenu("&File")
        self._action(f, "New from demo", self.new_from_demo, QKeySequence.New)
        self._action(f, "Open…", self.open_dialog, QKeySequence.Open)
        self.recent_menu = f.addMenu("Open recent")
        self._action(f, "Save", self.save, QKeySequence.Save)
        self._action(f, "Save as…", self.save_as, QKeySequence.SaveAs)
        f.addSeparator()
        self._action(f, "Contour sheet (PDF)…", self.export_sheet, "Ctrl+P")
        self._action(f, "Export GeoJSON, KML and CSV…", self.export_files)
        f.addSeparator()
        self._action(f, "Quit", self.close, QKeySequence.Quit)
        v = mb.addMenu("&View")
        self._action(v, "Fit to study", self.map.fit, "Ctrl+0")
        self._action(v, "Zoom in", lambda: self.map.zoom(0.8), QKeySequence.ZoomIn)
        self._action(v, "Zoom out", lambda: self.map.zoom(1.25), QKeySequence.ZoomOut)
        v.addSeparator()
        self.act_km = self._action(v, "Distances in km", lambda: self.set_units("km"))
        self.act_mi = self._action(v, "Distances in mi", lambda: self.set_units("mi"))
        self.act_shade = self._action(v, "Field shading on the map", self.toggle_shading)
        self.act_shade.setCheckable(True)
        self.act_shade.setChecked(self.settings.value("view/shading", "false") == "true")
        self.map.options.field_shading = self.act_shade.isChecked()
        self.act_legend = self._action(v, "Legend on the map", self.toggle_legend, "Ctrl+L")
        self.act_legend.setCheckable(True)
        self.act_legend.setChecked(self.settings.value("view/legend", "true") == "true")
        self.map.options.legend = self.act_legend.isChecked()
        self.act_dbu = self._action(v, "Fields in dBµV/m", lambda: self.set_field_units("dBu"))
        self.act_mvm = self._action(v, "Fields in mV/m", lambda: self.set_field_units("mV/m"))
        # the active units carry a check mark; each pair is exclusive
        for group, acts, current in (
                (QActionGroup(self), (self.act_km, self.act_mi), self.units),
                (QActionGroup(self), (self.act_dbu, self.act_mvm), self.field_units)):
            group.setExclusive(True)
            for a, unit in zip(acts, ("km", "mi") if acts[0] is self.act_km else ("dBu", "mV/m")):
                a.setCheckable(True)
                a.setChecked(unit == current)
                group.addAction(a)
        t = mb.addMenu("&Tools")
        self._action(t, "Site search…", self.site_search_dialog)
        self.act_stop_search = self._action(t, "Stop the site search", self.stop_search)
        self.act_stop_search.setEnabled(False)
        self.act_heat = self._action(t, "Show the site-search heat map", self.toggle_heat)
        self.act_heat.setCheckable(True)
        self.act_heat.setEnabled(False)
        self._action(t, "Compare with a saved study…", self.compare_dialog)
        self.act_exposure = self._action(t, "RF exposure boundaries near the towers (day)",
                                         self.toggle_exposure)
        self.act_exposure.setCheckable(True)
        self.act_channels = self._action(t, "Channel search (the whole band)…",
                                         self.start_channels)
        self.act_stop_channels = self._action(t, "Stop the channel search", self.stop_channels)
        self.act_stop_channels.setEnabled(False)
        h = mb.addMenu("&Help")
        self._action(h, "Cautions", self.show_cautions)
        self._action(h, "About mwreach", self.show_about)
        self._fill_recent()

    def _build_status(self):
        sb = self.statusBar()
        self.readout = QLabel("")
        self.progress = QProgressBar()
        self.progress.setMaximumWidth(220)
        self.progress.setVisible(False)
        self.cancel_btn = QPushButton("Cancel")
        self.cancel_btn.setVisible(False)
        self.cancel_btn.clicked.connect(self.computer.cancel)
        self.error_label = QLabel("")
        self.error_label.setStyleSheet("color: #b00020;")
        sb.addWidget(self.readout, 1)
        sb.addWidget(self.error_label)
        self.failures = QLabel("")
        sb.addPermanentWidget(self.failures)
        sb.addPermanentWidget(QLabel("Planning estimate — see Help ▸ Cautions"))
        sb.addPermanentWidget(self.progress)
        sb.addPermanentWidget(self.cancel_btn)

    # --- files --------------------------------------------------------------------------------
    def _update_title(self):
        star = " *" if self.document.dirty else ""
        self.setWindowTitle(f"mwreach — {self.document.display_name}{star}")

    def _fill_recent(self):
        self.recent_menu.clear()
        for p in self._recent():
            self._action(self.recent_menu, p, lambda _=False, p=p: self.open_path(p))

    def _recent(self) -> list[str]:
        v = self.settings.value("files/recent", [])
        return [v] if isinstance(v, str) else list(v or [])

    def _remember(self, path: str):
        rec = [path] + [p for p in self._recent() if p != path]
        self.settings.setValue("files/recent", rec[:MAX_RECENT])
        self._fill_recent()

    def _confirm_discard(self) -> bool:
        if not self.document.dirty or self.document.spec is None:
            return True
        ans = QMessageBox.question(self, "Unsaved changes",
                                   "The study has unsaved changes. Discard them?",
                                   QMessageBox.Discard | QMessageBox.Cancel, QMessageBox.Cancel)
        return ans == QMessageBox.Discard

    def new_from_demo(self):
        if self._confirm_discard():
            self.document.new_from_demo()
            self.map.fit()

    def open_dialog(self):
        if not self._confirm_discard():
            return
        path, _ = QFileDialog.getOpenFileName(self, "Open study", "", "mwreach study (*.toml)")
        if path:
            self.open_path(path)

    def open_path(self, path) -> bool:
        try:
            self.document.load(path)
        except (ValueError, OSError) as exc:
            QMessageBox.warning(self, "Cannot open study", str(exc))
            return False
        self._remember(str(pathlib.Path(path).resolve()))
        self.result = None
        return True

    def save(self) -> bool:
        if self.document.path is None:
            return self.save_as()
        return self._save_to(None)

    def save_as(self) -> bool:
        path, _ = QFileDialog.getSaveFileName(self, "Save study as", "", "mwreach study (*.toml)")
        return bool(path) and self._save_to(path)

    def _save_to(self, path) -> bool:
        try:
            saved = self.document.save(path)
        except (ValueError, OSError) as exc:
            QMessageBox.warning(self, "Cannot save study", str(exc))
            return False
        self._remember(str(saved))
        return True

    def export_sheet(self, path=None):
        if self.full_result is None:
            QMessageBox.information(self, "Contour sheet", "Wait for the computation to finish.")
            return
        if not path:
            path, _ = QFileDialog.getSaveFileName(self, "Contour sheet", "", "PDF (*.pdf)")
        if path:
            from .sheet import write_sheet

            try:
                write_sheet(self.full_result, path)
            except (ValueError, OSError) as exc:
                QMessageBox.warning(self, "Cannot write the contour sheet", str(exc))
                return False
            return True
        return False

    def export_files(self, folder=None):
        if self.full_result is None:
            return False
        if not folder:
            folder = QFileDialog.getExistingDirectory(self, "Export to folder")
        if folder:
            try:
                write_outputs(self.full_result, folder)
            except (ValueError, OSError) as exc:
                QMessageBox.warning(self, "Cannot export", str(exc))
                return False
            return True
        return False

    def closeEvent(self, ev):  # noqa: N802
        if not self._confirm_discard():
            ev.ignore()
            return
        if self.search_thread is not None:  # keep what it found; do not leave it running
            self.search_thread.stop()
            self.search_thread.wait(30_000)
        if self.channel_thread is not None:  # stops after the channels in hand
            self.channel_thread.stop()
            self.channel_thread.wait(30_000)
        if self.exposure_thread is not None:
            self.exposure_thread.wait(30_000)
        self.computer.shutdown()
        super().closeEvent(ev)

    # --- computation --------------------------------------------------------------------------
    def _recompute(self):
        for e in self.editors:
            e.refresh()
        if self.document.spec is not None:
            self.error_label.setText("")
            self.computer.submit(self.document.spec, label="computing")

    def _on_site_drag(self, lat, lon):
        # one coarse run at a time: while one is in flight the newest position waits and goes
        # next, so the preview keeps up with a fast mouse instead of each move superseding the
        # last (which showed nothing until the mouse stopped)
        if self._coarse_busy:
            self._coarse_pending = (lat, lon)
            return
        self._submit_coarse(lat, lon)

    def _submit_coarse(self, lat, lon):
        self._coarse_busy = True
        self._coarse_pending = None
        spec = self.document.spec.with_site(lat, lon)
        self.computer.submit(spec, bearings=COARSE_BEARINGS, interference=False, label="coarse")

    def _on_site_drop(self, lat, lon):
        self._coarse_busy, self._coarse_pending = False, None
        self.document.set_site_quiet(lat, lon)  # full recompute through `changed`

    # --- site search ------------------------------------------------------------------------
    def site_search_dialog(self):
        from PySide6.QtWidgets import QInputDialog

        radius, ok = QInputDialog.getDouble(self, "Site search",
                                            "Search within [km] of the present site:", 30.0,
                                            1.0, 500.0, 1)
        if not ok:
            return
        step, ok = QInputDialog.getDouble(self, "Site search", "Candidate spacing [km]:",
                                          max(radius / 10.0, 0.5), 0.1, 100.0, 2)
        if ok:
            self.start_search(radius, step)

    def start_search(self, radius_km: float, step_km: float):
        """Run a site search around the present site in a background thread; its heat map is
        shown when it is done (click a candidate to move the site there)."""
        from mwreach.coverage.search import SearchSettings

        from .worker import SearchThread

        if self.search_thread is not None:
            return
        settings = SearchSettings(step_km=step_km, radius_km=radius_km)
        self.search_thread = SearchThread(self.document.spec, settings, self)
        self.search_thread.progressed.connect(
            lambda done, total: self.statusBar().showMessage(
                f"Site search: {done} of {total} candidates…"))
        self.search_thread.done.connect(self._on_search)
        self.search_thread.failed.connect(self._on_search_failed)
        self.act_stop_search.setEnabled(True)
        self.search_thread.start()

    def stop_search(self):
        if self.search_thread is not None:
            self.search_thread.stop()

    def _on_search(self, search):
        self.search_thread.wait()
        self.search_thread = None
        self.act_stop_search.setEnabled(False)
        self.last_search = search
        self.act_heat.setEnabled(True)
        self.act_heat.setChecked(True)
        self.map.set_search(search)
        self.map.fit_heat()
        best = search.candidates[0] if search.candidates else None
        more = " (stopped early)" if search.stopped_early else ""
        self.statusBar().showMessage(
            f"Site search{more}: {len(search.candidates)} candidates; best at "
            f"{best.lat:.4f}, {best.lon:.4f} — click a square to move the site there"
            if best else "Site search: no candidate in the area")

    def _on_search_failed(self, msg):
        self.search_thread.wait()
        self.search_thread = None
        self.act_stop_search.setEnabled(False)
        QMessageBox.warning(self, "Site search failed", msg)

    # --- RF exposure layer ------------------------------------------------------------------
    def toggle_exposure(self):
        """Show (computing in the background) or hide the RF exposure screening boundaries of
        the day antenna with the study's [exposure] standard; zoom in to the site to see them."""
        if not self.act_exposure.isChecked():
            self.map.options.exposure = None
            self.map.update()
            return
        if self.exposure_thread is not None or self.document.spec is None:
            return
        from .worker import ExposureThread

        self.exposure_thread = ExposureThread(self.document.spec, "day", self)
        self.exposure_thread.done.connect(self._on_exposure)
        self.exposure_thread.failed.connect(self._on_exposure_failed)
        self.statusBar().showMessage("RF exposure screening near the towers…")
        self.exposure_thread.start()

    def _on_exposure(self, data):
        self.exposure_thread.wait()
        self.exposure_thread = None
        self.last_exposure = data
        if self.act_exposure.isChecked():
            self.map.options.exposure = data
            self.map.update()
        parts = [f"{n}: " + (f"above within {v['largest_distance_m']:g} m of the reference point"
                             if v["largest_distance_m"] > 0 else "below beyond 1 m of the towers")
                 for n, v in data["standards"].items()]
        self.statusBar().showMessage("RF exposure (screening estimate only; zoom in to the site): "
                                     + "; ".join(parts))

    def _on_exposure_failed(self, msg):
        self.exposure_thread.wait()
        self.exposure_thread = None
        self.act_exposure.setChecked(False)
        QMessageBox.warning(self, "RF exposure screening failed", msg)

    # --- channel search ---------------------------------------------------------------------
    def start_channels(self, from_khz: float | None = None, to_khz: float | None = None):
        """The study on every channel of its plan's band in a background thread; the band view
        opens when it is done (click a channel to move the study there)."""
        from mwreach.coverage.channels import PLAN_BAND_KHZ

        from .worker import ChannelThread

        spec = self.document.spec
        if self.channel_thread is not None or spec is None:
            return
        if spec.interference is None:
            QMessageBox.information(self, "Channel search", "The study lists no neighbours: "
                                    "every channel is open.")
            return
        lo, hi = PLAN_BAND_KHZ.get(spec.interference.protection.plan, (525.0, 1705.0))
        self.channel_thread = ChannelThread(spec, self.document.doc,
                                            lo if from_khz is None else from_khz,
                                            hi if to_khz is None else to_khz, self)
        self.channel_thread.progressed.connect(
            lambda done, total: self.statusBar().showMessage(
                f"Channel search: {done} of {total} channels…"))
        self.channel_thread.done.connect(self._on_channels)
        self.channel_thread.failed.connect(self._on_channels_failed)
        self.act_stop_channels.setEnabled(True)
        self.act_channels.setEnabled(False)
        self.channel_thread.start()

    def stop_channels(self):
        if self.channel_thread is not None:
            self.channel_thread.stop()

    def _channels_finished(self):
        self.channel_thread.wait()
        self.channel_thread = None
        self.act_stop_channels.setEnabled(False)
        self.act_channels.setEnabled(True)

    def _on_channels(self, search):
        from PySide6.QtWidgets import QDialog, QLabel, QVBoxLayout

        from mwreach.coverage.channels import channels_summary

        from .bandplot import BandView

        self._channels_finished()
        summary = channels_summary(search, self.document.spec)
        self.last_channels = summary
        dlg = QDialog(self)
        more = " (stopped early)" if search.stopped_early else ""
        dlg.setWindowTitle(f"Channels open at {self.document.spec.station.name}'s site{more}")
        lay = QVBoxLayout(dlg)
        head = QLabel(f"{len(search.rows)} channels, {search.from_khz:g}–{search.to_khz:g} kHz; "
                      "each bar is the largest power every neighbour allows. Click a channel to "
                      "move the study there; hover for its limits. Planning estimate only.")
        head.setWordWrap(True)
        lay.addWidget(head)
        self.band_view = BandView(summary, self.set_frequency)
        lay.addWidget(self.band_view, 1)  # the band takes the height, the line above does not
        dlg.resize(1200, 680)
        dlg.show()
        self.channels_window = dlg
        self.statusBar().showMessage(f"Channel search{more}: {len(search.rows)} channels in "
                                     f"{search.elapsed_s:.0f} s")

    def _on_channels_failed(self, msg):
        self._channels_finished()
        QMessageBox.warning(self, "Channel search failed", msg)

    def set_frequency(self, freq_khz: float) -> str | None:
        """Move the study to ``freq_khz`` (a recompute follows); returns the refusal, if any."""
        def mutate(doc):
            doc.setdefault("station", {})["freq_khz"] = float(freq_khz)

        err = self.document.try_update(mutate)
        if err:
            QMessageBox.warning(self, "Frequency not set", err)
        else:
            self.statusBar().showMessage(f"Study moved to {freq_khz:g} kHz; recomputing…")
        return err

    def compare_dialog(self):
        """Pick a saved study and show what the open study gains and loses against it."""
        from PySide6.QtWidgets import QFileDialog

        path, _ = QFileDialog.getOpenFileName(self, "Compare with a saved study", "",
                                              "Study files (*.toml)")
        if path:
            self.compare_with(path)

    def compare_with(self, path, show: bool = True):
        """Compare the saved study at ``path`` (before) with the open one (after); returns the
        comparison and, with ``show``, opens a window with its table and picture."""
        from PySide6.QtGui import QPixmap
        from PySide6.QtWidgets import QDialog, QLabel, QTableWidget, QTableWidgetItem, \
            QVBoxLayout

        from mwreach.coverage.compare import compare_results
        from mwreach.coverage.report import people_text
        from mwreach.coverage.study import Study

        from .comparemap import render_compare

        if self.document.spec is None:
            return None
        try:
            before = Study.from_file(path).run(interference=False)
            after = Study(self.document.spec).run(interference=False)
            comp = compare_results(before, after)
        except ValueError as exc:
            QMessageBox.warning(self, "Cannot compare", str(exc))
            return None
        self.last_compare = comp
        if not show:
            return comp
        dlg = QDialog(self)
        dlg.setWindowTitle(f"Gained and lost against {pathlib.Path(path).name}")
        lay = QVBoxLayout(dlg)
        heads = ["Contour", "Before km²", "After km²", "Gained km²", "Lost km²", "People +",
                 "People −"]
        table = QTableWidget(len(comp["levels"]), len(heads))
        table.setHorizontalHeaderLabels(heads)
        for i, r in enumerate(comp["levels"]):
            cells = [r["label"], f"{r['before_km2']:,.0f}", f"{r['after_km2']:,.0f}",
                     f"{r['gain_km2']:,.0f}", f"{r['loss_km2']:,.0f}",
                     people_text(r["gain_population"]), people_text(r["loss_population"])]
            for j, c in enumerate(cells):
                table.setItem(i, j, QTableWidgetItem(c))
        table.resizeColumnsToContents()
        table.setMaximumHeight(table.horizontalHeader().height() + 4
                               + sum(table.rowHeight(i) for i in range(table.rowCount())))
        lay.addWidget(table)
        pic = QLabel()
        pic.setPixmap(QPixmap.fromImage(render_compare(comp, before, after, 1000, 700)))
        lay.addWidget(pic)
        dlg.resize(1040, 980)
        dlg.show()
        self.compare_window = dlg
        return comp

    def toggle_heat(self):
        self.map.set_search(self.last_search if self.act_heat.isChecked() else None)

    def _on_candidate(self, lat, lon):
        self.document.set_site_quiet(lat, lon)  # the full study runs for the new site

    def _on_result(self, req, result):
        self.result = result
        self.map.set_result(result)
        if req.bearings is not None:  # a coarse preview: the newest waiting position goes next
            self._coarse_busy = False
            if self._coarse_pending is not None and self.map._drag:
                self._submit_coarse(*self._coarse_pending)
        if req.bearings is None:
            self._on_idle()
            self.full_result = result
            if self.act_exposure.isChecked() and self.last_exposure is not None:
                self.last_exposure = None  # the study changed: screen it again
                self.toggle_exposure()
            self._show_failures(result)
            self._stale_views = set(range(self.results_tabs.count()))
            self._refresh_view(self.results_tabs.currentIndex())

    def _show_failures(self, result):
        """Failed protection checks show in the status bar (and as red crosses on the map)
        without opening the interference list."""
        inter = result.interference
        if inter is None:
            self.failures.setText("")
            return
        failed = [r for r in inter.neighbour_summary() if not r["passed"]]
        if failed:
            names = ", ".join(dict.fromkeys(f"{r['neighbour']} ({r['kind']})" for r in failed))
            self.failures.setText(f"⚠ {len(failed)} protection check(s) fail: {names}")
            self.failures.setStyleSheet("color: #b00020; font-weight: bold;")
        else:
            self.failures.setText("All protection checks pass")
            self.failures.setStyleSheet("color: #1a7f37;")

    def _refresh_view(self, index: int):
        """Fill a result view from the latest full result, only when it is shown."""
        if self.full_result is None or index not in self._stale_views:
            return
        self._stale_views.discard(index)
        r = self.full_result
        view = self.results_tabs.widget(index)
        if view is self.radial_table:
            self.radial_table.show_result(r, self.units)
        elif view is self.profile:
            self.profile.show_result(r, self.units, self.field_units)
        elif view is self.pattern:
            self.pattern.show_result(r)
        elif view is self.interference_view:
            self.interference_table.show_result(r)
            self.interference_view.header.setText(max_power_text(r))

    def _on_error(self, req, msg):
        self.error_label.setText(msg.splitlines()[0])
        QMessageBox.warning(self, "Computation failed", msg)

    def _on_progress(self, label, done, total):
        self.progress.setVisible(True)
        self.cancel_btn.setVisible(True)
        self.progress.setFormat(f"{label} %p%")
        self.progress.setMaximum(total)
        self.progress.setValue(done)

    def _on_idle(self):
        self.progress.setVisible(False)
        self.cancel_btn.setVisible(False)

    # --- readout and units --------------------------------------------------------------------
    def _on_hover(self, x_km, y_km):
        r = self.result
        if r is None:
            return
        st = r.spec.station
        lon, lat = local_projection(st.lat, st.lon).to_lonlat(x_km, y_km)
        d, az, _ = inverse(st.lat, st.lon, lat, lon)
        d, az = float(d), float(az)
        b = r.radials.bearings_deg
        i = int(np.argmin(np.abs((b - az + 180) % 360 - 180)))
        field = ""
        if r.radials.dist_km[0] <= d <= r.radials.dist_km[-1]:
            e = float(r.radials.field_at(i, d))
            mv = 10 ** (e / 20) / 1e3
            field = f"field {mv:.3g} mV/m ({e:.1f} dBµV/m)" if self.field_units == "mV/m" else \
                f"field {e:.1f} dBµV/m ({mv:.3g} mV/m)"
        g = r.spec.ground.ground_at(float(lon), float(lat))
        f = 1.0 if self.units == "km" else 1 / KM_PER_MI
        self.readout.setText(
            f"{float(lat):.5f}, {float(lon):.5f} | {az:.1f}° {d * f:.2f} {self.units} from site | "
            f"{field} | ground {g.label()}")

    def set_units(self, units: str):
        self.units = units
        self.settings.setValue("units/distance", units)
        self.map.set_units(units)
        if self.full_result is not None:
            self._stale_views |= {self.results_tabs.indexOf(self.radial_table),
                                  self.results_tabs.indexOf(self.profile)}
            self._refresh_view(self.results_tabs.currentIndex())

    def set_field_units(self, units: str):
        self.field_units = units
        self.settings.setValue("units/field", units)
        self.profile.field_units = units
        self.interference_table.field_units = units
        if self.full_result is not None:
            self._stale_views |= {self.results_tabs.indexOf(self.profile),
                                  self.results_tabs.indexOf(self.interference_view)}
            self._refresh_view(self.results_tabs.currentIndex())

    def toggle_legend(self):
        """Show or fold away the map legend (it takes room on small screens)."""
        on = self.act_legend.isChecked()
        self.map.options.legend = on
        self.settings.setValue("view/legend", "true" if on else "false")
        self.map.update()

    def toggle_shading(self):
        on = self.act_shade.isChecked()
        self.settings.setValue("view/shading", "true" if on else "false")
        self.map.options.field_shading = on
        self.map.update()

    def show_cautions(self):
        QMessageBox.information(self, "Cautions", CAUTIONS)

    def show_about(self):
        from mwreach.coverage import version

        QMessageBox.about(self, "About mwreach",
                          f"mwreach {version()}\nMedium-wave coverage and interference "
                          "estimates.\n\n" + CAUTIONS)


def _raise(exc):
    raise exc


def run_gui(study=None, screenshot=None) -> int:
    """Start the application; with ``screenshot`` compute, save a PNG of the window and exit."""
    app = ensure_app(gui=True)
    settings = None
    if screenshot:
        # a batch picture must not touch the user's settings (recent files, units)
        import tempfile

        tmp_settings = tempfile.NamedTemporaryFile(prefix="mwreach-settings-", suffix=".ini",
                                                   delete=False)
        tmp_settings.close()
        settings = QSettings(tmp_settings.name, QSettings.IniFormat)
    win = MainWindow(settings)
    if study and screenshot:
        try:  # no dialog in batch use: the error goes to stderr
            win.document.load(study)
        except (ValueError, OSError) as exc:
            print(f"mwreach gui: error: {str(exc).splitlines()[0]}", file=sys.stderr)
            return 2
    elif study:
        if not win.open_path(study):
            return 2
    elif screenshot:
        win.document.new_from_demo()
    win.show()
    if screenshot:
        status = {"rc": 0}

        def done(req, result):
            if req.bearings is not None:
                return
            app.processEvents()
            win.map.fit()
            app.processEvents()
            try:  # encoded in memory, then written in one step like every other output
                atomic_write(screenshot, png_bytes(win.grab()),
                             check=lambda b: None if b.startswith(b"\x89PNG") else
                             _raise(ValueError(f"{screenshot}: the picture read back wrong")))
                print(f"wrote {screenshot}")
                status["rc"] = 0
            except ValueError as exc:
                print(f"mwreach gui: error: {str(exc).splitlines()[0]}", file=sys.stderr)
                status["rc"] = 2
            app.quit()

        def failed(req, msg):
            print(f"mwreach gui: error: {msg.splitlines()[0]}", file=sys.stderr)
            status["rc"] = 2
            app.quit()

        win.computer.result.connect(done)
        win.computer.error.connect(failed)
        QTimer.singleShot(120_000, app.quit)  # never hang in batch use
        app.exec()
        win.computer.shutdown()
        win.deleteLater()
        app.processEvents()
        pathlib.Path(settings.fileName()).unlink(missing_ok=True)
        return status["rc"]
    rc = app.exec()
    return int(rc)
