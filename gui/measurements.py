"""The Measurements view: import field-strength readings, fit σ and E0 per radial (off the GUI
thread), plot measured against fitted, and accept the fitted σ into the study."""

from __future__ import annotations

from PySide6.QtCore import QRectF, QThread, Signal
from PySide6.QtGui import QPainter
from PySide6.QtWidgets import (
    QFileDialog,
    QHBoxLayout,
    QHeaderView,
    QLabel,
    QPushButton,
    QSplitter,
    QTableWidget,
    QTableWidgetItem,
    QVBoxLayout,
    QWidget,
)

from mwreach.coverage.fit import curve_family

from .fitplot import _radial_paths_fn, draw_fit_plot

__all__ = ["MeasurementsView", "FitThread"]


class FitThread(QThread):
    """Reads the readings and fits them off the GUI thread: ``done((fits, combined, eps))`` or
    ``failed(message)``."""

    done = Signal(object)
    failed = Signal(str)

    def __init__(self, spec, path, parent=None):
        super().__init__(parent)
        self.spec, self.path = spec, path

    def run(self):
        from mwreach.coverage.fit import fit_all, fit_combined, near_field_km, unknown_grounds
        from mwreach.coverage.inputs import read_measurements

        try:
            spec = self.spec
            groups = read_measurements(self.path, spec)
            eps = next(iter(unknown_grounds(spec)))[1]
            near = near_field_km(spec.station.freq_khz, spec.station.antenna)
            fits = fit_all(spec, groups, eps, near)
            combined = fit_combined(spec, groups, eps, near) if len(groups) > 1 else None
            self.done.emit((fits, combined, eps))
        except Exception as exc:  # shown in the view, not on the console
            self.failed.emit(str(exc).splitlines()[0] if str(exc) else type(exc).__name__)


class _Plot(QWidget):
    def __init__(self, parent=None):
        super().__init__(parent)
        self.setMinimumHeight(220)
        self.fit = self.spec = self.family = None

    def show_fit(self, spec, fit, eps):
        self.spec, self.fit = spec, fit
        self.family = curve_family(spec.station.freq_khz, eps, spec.earth_k) if fit else None
        self.update()

    def paintEvent(self, ev):  # noqa: N802
        p = QPainter(self)
        p.fillRect(self.rect(), self.palette().base())
        if self.fit is not None:
            p.setRenderHint(QPainter.Antialiasing, True)
            draw_fit_plot(p, QRectF(self.rect()).adjusted(4, 4, -4, -4), self.fit, self.family,
                          _radial_paths_fn(self.spec, self.fit))
        p.end()


class MeasurementsView(QWidget):
    """Import → fit → look → accept. Works on the document's study; never edits it except by
    *Accept*, which goes through the document's validation like any other edit."""

    HEAD = ["Radial", "Bearing°", "σ [mS/m]", "95 % interval", "E0 [mV/m at 1 km]", "RMS [dB]",
            "Used", "Near field", "Outliers", "Constrained"]

    def __init__(self, document, parent=None):
        super().__init__(parent)
        self.document = document
        self.thread = None
        self.fits, self.combined, self.eps = [], None, None
        lay = QVBoxLayout(self)
        row = QHBoxLayout()
        self.import_btn = QPushButton("Import readings (CSV) and fit…")
        self.accept_btn = QPushButton("Accept σ into the study")
        self.accept_btn.setEnabled(False)
        self.import_btn.clicked.connect(self._choose)
        self.accept_btn.clicked.connect(self.accept_sigma)
        row.addWidget(self.import_btn)
        row.addWidget(self.accept_btn)
        row.addStretch(1)
        lay.addLayout(row)
        self.status = QLabel("Readings: a CSV with lat, lon and field_mv_m or field_dbu "
                             "(optional radial, bearing_deg, dist_km, note).")
        self.status.setWordWrap(True)
        lay.addWidget(self.status)
        split = QSplitter()
        self.table = QTableWidget(0, len(self.HEAD))
        self.table.setHorizontalHeaderLabels(self.HEAD)
        self.table.horizontalHeader().setSectionResizeMode(QHeaderView.ResizeToContents)
        self.table.setEditTriggers(QTableWidget.NoEditTriggers)
        self.table.setSelectionBehavior(QTableWidget.SelectRows)
        self.table.currentCellChanged.connect(lambda r, *_: self._plot_row(r))
        self.plot = _Plot()
        split.addWidget(self.table)
        split.addWidget(self.plot)
        split.setSizes([500, 500])
        lay.addWidget(split, 1)

    def _choose(self):
        path, _ = QFileDialog.getOpenFileName(self, "Field-strength readings",
                                              str(self.document.base_dir), "CSV (*.csv)")
        if path:
            self.import_and_fit(path)

    def import_and_fit(self, path) -> None:
        if self.thread is not None:
            return
        self.status.setText(f"Fitting {path}…")
        self.thread = FitThread(self.document.spec, path, self)
        self.thread.done.connect(self._done)
        self.thread.failed.connect(self._failed)
        self.thread.start()

    def _finish_thread(self):
        self.thread.wait()
        self.thread = None

    def _failed(self, msg):
        self._finish_thread()
        self.status.setText(f"Not fitted: {msg}")

    def _done(self, payload):
        self._finish_thread()
        self.fits, self.combined, self.eps = payload
        self.table.setRowCount(len(self.fits))
        for i, f in enumerate(self.fits):
            vals = [f.radial, f"{f.bearing_deg:.1f}", f"{f.sigma_ms_m:.3g}",
                    f"{f.sigma_low_ms_m:.3g}–{f.sigma_high_ms_m:.3g}", f"{f.e0_mv_m:.1f}",
                    f"{f.rms_db:.2f}", str(len(f.used)), str(len(f.near_field)),
                    str(len(f.outliers)), "yes" if f.constrained else "NO"]
            for j, v in enumerate(vals):
                self.table.setItem(i, j, QTableWidgetItem(v))
        lines = [f"{len(self.fits)} radial(s) fitted (εr {self.eps:g})."]
        if self.combined is not None:
            for name, s in self.combined.sigma_ms_m.items():
                lines.append(f"All radials together: {name} σ {s:.3g} mS/m "
                             f"({self.combined.sigma_low_ms_m[name]:.3g}–"
                             f"{self.combined.sigma_high_ms_m[name]:.3g}).")
        for f in self.fits:
            lines += [f"{f.radial}: {w}" for w in f.warnings]
        self.status.setText(" ".join(lines))
        self.accept_btn.setEnabled(bool(self.fits))
        if self.fits:
            self.table.selectRow(0)
            self._plot_row(0)

    def _plot_row(self, row: int):
        f = self.fits[row] if 0 <= row < len(self.fits) else None
        self.plot.show_fit(self.document.spec, f, self.eps)

    def fitted_sigma(self) -> float | None:
        """The σ to accept: all radials together, else the one radial."""
        if self.combined is not None and len(self.combined.sigma_ms_m) == 1:
            return float(next(iter(self.combined.sigma_ms_m.values())))
        if len(self.fits) == 1:
            return self.fits[0].sigma_ms_m
        return None

    def accept_sigma(self) -> str | None:
        """Put the fitted σ into the study's default ground (when that is what was fitted)."""
        from mwreach.coverage.fit import unknown_grounds

        if any(getattr(z, "fit", False) for z in self.document.spec.ground.zones):
            msg = ("zones marked fit are in the zones file: write them with "
                   "mwreach fit --write-zones, then choose that file under Ground")
            self.status.setText(f"Not applied: {msg}")
            return msg
        sigma = self.fitted_sigma()
        if sigma is None:
            return "nothing fitted"
        eps = next(iter(unknown_grounds(self.document.spec)))[1]

        def mutate(d):
            g = d.setdefault("ground", {})
            g.pop("class", None)
            g["sigma_ms_m"], g["eps_r"] = round(float(sigma), 4), float(eps)

        err = self.document.try_update(mutate)
        self.status.setText(f"Not applied: {err}" if err else
                            f"Default ground set to σ {sigma:.4g} mS/m, εr {eps:g}; recomputing.")
        return err
