"""Editors (inputs) and result views. Editors change the study only through the document;
result views only display a StudyResult."""

from __future__ import annotations

import copy

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import QAbstractTableModel, QModelIndex, QSortFilterProxyModel, Qt
from PySide6.QtGui import QColor
from PySide6.QtWidgets import (
    QCheckBox,
    QComboBox,
    QFileDialog,
    QFormLayout,
    QHBoxLayout,
    QHeaderView,
    QLabel,
    QLineEdit,
    QPushButton,
    QDoubleSpinBox,
    QTableView,
    QTableWidget,
    QTableWidgetItem,
    QVBoxLayout,
    QWidget,
)

from mwreach.coverage.antenna import height_m, quarter_wave_m
from mwreach.coverage.export import KM_PER_MI
from mwreach.coverage.ground import GROUND_CLASSES
from mwreach.coverage.groundwave import mv_m_to_dbu
from mwreach.coverage.report import (
    citation,
    describe_max_power,
    field_text,
    format_kw,
    margin_text,
    mv_m_text,
    summary_cells,
)

from .render import conductivity_colour, level_colour

__all__ = ["StationEditor", "AntennaEditor", "GroundEditor", "LevelsEditor", "NeighboursEditor",
           "NightEditor", "RadialTable", "ProfilePlot", "PatternPlot", "InterferenceTable"]

ERROR_STYLE = "color: #b00020;"


def _number_or_text(text: str):
    """A number when the text is one, else the text itself (the core then names the field)."""
    t = text.strip()
    try:
        return float(t)
    except ValueError:
        return t


class _Editor(QWidget):
    """Base: a message line under the editor; fields keep what the user typed on errors."""

    def __init__(self, document, parent=None):
        super().__init__(parent)
        self.document = document
        self.message = QLabel("")
        self.message.setWordWrap(True)
        self.message.setStyleSheet(ERROR_STYLE)
        self._loading = False

    def apply(self, mutate, field_widget=None) -> bool:
        if self._loading:
            return True
        err = self.document.try_update(mutate)
        self.message.setText("" if err is None else f"Not applied: {err}")
        if err is None:
            # the whole study now validates: no field of this editor stays marked refused
            for w in self.findChildren(QLineEdit):
                if w.styleSheet():
                    w.setStyleSheet("")
        elif field_widget is not None:
            field_widget.setStyleSheet("border: 1px solid #b00020;")
        return err is None


class StationEditor(_Editor):
    FIELDS = [("name", "Station name", False), ("lat", "Latitude [deg, WGS84]", True),
              ("lon", "Longitude [deg, WGS84]", True), ("freq_khz", "Frequency [kHz]", True),
              ("power_day_kw", "Day power [kW]", True), ("power_night_kw", "Night power [kW]", True),
              ("class", "Class (A, B, C, D)", False)]

    def __init__(self, document, parent=None):
        super().__init__(document, parent)
        form = QFormLayout(self)
        self.edits = {}
        for key, label, numeric in self.FIELDS:
            e = QLineEdit()
            e.setObjectName(f"station_{key}")
            e.editingFinished.connect(lambda k=key, w=e, n=numeric: self._commit(k, w, n))
            form.addRow(label, e)
            self.edits[key] = e
        self.title = QLineEdit()
        self.title.editingFinished.connect(self._commit_title)
        form.addRow("Study title", self.title)
        form.addRow(self.message)

    def _commit(self, key, widget, numeric):
        value = _number_or_text(widget.text()) if numeric else widget.text()
        station = self.document.doc.get("station", {})
        shown = self._shown_value(key)
        if station.get(key) == value or (key not in station and str(value) == shown):
            widget.setStyleSheet("")  # the text is what was shown: nothing changed
            return
        self.apply(lambda d: d.setdefault("station", {}).__setitem__(key, value), widget)

    def _shown_value(self, key) -> str:
        """The text a field shows: the file's value, or the effective one where the file leaves
        the key out (the class)."""
        st = self.document.doc.get("station", {})
        if key == "class" and key not in st and self.document.spec is not None:
            return self.document.spec.station.station_class
        v = st.get(key, "")
        if isinstance(v, float) and key in ("lat", "lon"):
            return f"{v:.6f}".rstrip("0").rstrip(".")
        return str(v)

    def _commit_title(self):
        if self.title.text() == str(self.document.doc.get("study", {}).get("title", "")):
            return
        self.apply(lambda d: d.setdefault("study", {}).__setitem__("title", self.title.text()))

    def refresh(self):
        self._loading = True
        for key, e in self.edits.items():
            if not e.hasFocus() and e.styleSheet() == "":
                e.setText(self._shown_value(key))
        self.title.setText(str(self.document.doc.get("study", {}).get("title", "")))
        self.title.setCursorPosition(0)  # show the title from its start
        self._loading = False


def _cell_text(v) -> str:
    return "" if v is None else f"{v:g}" if isinstance(v, float) else str(v)


def _two_lines(label: str) -> str:
    """"Top loading [deg]" → "Top loading\n[deg]"; "Field ratio" → "Field\nratio"."""
    if " [" in label:
        return label.replace(" [", "\n[", 1)
    return label.replace(" ", "\n", 1)


class _TableEditor(_Editor):
    """A table whose rows are a list of TOML tables in the document. Subclasses give
    ``COLUMNS`` and ``DOC_PATH`` (where the list of tables lives in the document), and may override
    ``exclusive`` (keys that replace each other, such as height_deg and height_m).

    An edit changes only the cells whose text the user changed; keys the table does not show,
    and values it shows rounded, survive untouched.
    """

    COLUMNS: list[tuple[str, str]] = []
    TEXT_KEYS = ("label", "name", "array")
    exclusive: tuple[tuple[str, str], ...] = ()
    DOC_PATH: tuple[str, ...] = ()

    def __init__(self, document, parent=None):
        super().__init__(document, parent)
        lay = QVBoxLayout(self)
        self.table = QTableWidget(0, len(self.COLUMNS))
        # headers on two lines (name, then unit), so that more columns fit the dock's width
        self.table.setHorizontalHeaderLabels([_two_lines(c[1]) for c in self.COLUMNS])
        header = self.table.horizontalHeader()
        header.setSectionResizeMode(QHeaderView.ResizeToContents)  # whole header texts; the
        header.setStretchLastSection(False)  # table scrolls sideways when they need more room
        self.table.cellChanged.connect(self._changed)
        lay.addWidget(self.table)
        buttons = QHBoxLayout()
        self.add_btn = QPushButton("Add row")
        self.del_btn = QPushButton("Remove row")
        self.add_btn.clicked.connect(self._add)
        self.del_btn.clicked.connect(self._remove)
        buttons.addWidget(self.add_btn)
        buttons.addWidget(self.del_btn)
        buttons.addStretch(1)
        lay.addLayout(buttons)
        lay.addWidget(self.message)
        self._shown: list[dict] = []  # the tables as shown, to tell edited cells apart

    def doc_rows(self, doc) -> list:
        """The document's list of tables at :attr:`DOC_PATH` (created if missing)."""
        *tables, key = self.DOC_PATH
        for t in tables:
            doc = doc.setdefault(t, {})
        return doc.setdefault(key, [])

    def rows_from_doc(self):
        return [dict(t) for t in self.doc_rows(copy.deepcopy(self.document.doc))]

    def refresh(self):
        if self.message.text():
            return  # a refused edit is pending: keep what the user typed in the table
        self._loading = True
        rows = self.rows_from_doc()
        self._shown = rows
        self.table.setRowCount(len(rows))
        for i, r in enumerate(rows):
            for j, (key, _) in enumerate(self.COLUMNS):
                self.table.setItem(i, j, QTableWidgetItem(_cell_text(r.get(key))))
        self._loading = False

    def _edited_rows(self) -> list[dict]:
        """The document's tables with the user's changed cells applied."""
        out = []
        for i in range(self.table.rowCount()):
            orig = self._shown[i] if i < len(self._shown) else {}
            row = dict(orig)
            changed = set()
            for j, (key, _) in enumerate(self.COLUMNS):
                item = self.table.item(i, j)
                text = item.text().strip() if item else ""
                if text == _cell_text(orig.get(key)):
                    continue  # untouched: keep the exact value (and its absence)
                changed.add(key)
                if text == "":
                    row.pop(key, None)
                else:
                    row[key] = text if key in self.TEXT_KEYS else _number_or_text(text)
            for a, b in self.exclusive:  # entering one drops the other
                if a in changed and a in row:
                    row.pop(b, None)
                elif b in changed and b in row:
                    row.pop(a, None)
            out.append(row)
        return out

    def write_rows(self, doc, rows):
        target = self.doc_rows(doc)
        target[:] = [r for r in rows if r]  # a fresh empty row is not a table yet

    def _changed(self, *_):
        if self._loading:
            return
        rows = self._edited_rows()
        self.apply(lambda d: self.write_rows(d, rows))

    def _add(self):
        self._loading = True
        self.table.insertRow(self.table.rowCount())
        self._loading = False

    def _remove(self):
        r = self.table.currentRow()
        if r >= 0:
            self.table.removeRow(r)
            if r < len(self._shown):
                del self._shown[r]
            self._changed()


#: the operating periods the antenna tab edits, and the study table of each
PERIOD_SECTIONS = (("day", "Day", "antenna"), ("night", "Night", "antenna_night"),
                   ("critical", "Critical hours", "antenna_critical"))
PATTERN_CHOICES = (("", "Automatic"), ("standard", "Standard"), ("theoretical", "Theoretical"))


class AugmentationEditor(_TableEditor):
    """Augmentations of the selected period's standard pattern (47 CFR 73.152)."""

    COLUMNS = [("azimuth_deg", "Central azimuth [deg true]"), ("span_deg", "Span [deg]"),
               ("field_mv_m", "Augmented field [mV/m at 1 km]")]
    DOC_PATH = ("antenna", "augmentation")


class AntennaEditor(_TableEditor):
    """Towers, pattern kind and augmentations of each operating period's antenna."""

    COLUMNS = [("height_deg", "Height [deg]"), ("height_m", "Height [m]"),
               ("top_loading_deg", "Top loading [deg]"), ("field_ratio", "Field ratio"),
               ("phase_deg", "Phase [deg]"), ("spacing_deg", "Spacing [deg]"),
               ("orientation_deg", "Orientation [deg true]"), ("loss_ohm", "Loss [Ω]"),
               ("efficiency", "Efficiency")]
    exclusive = (("height_deg", "height_m"), ("loss_ohm", "efficiency"))

    def __init__(self, document, parent=None):
        self.period = "day"
        self.DOC_PATH = ("antenna", "tower")
        super().__init__(document, parent)
        lay = self.layout()
        top = QFormLayout()
        self.period_box = QComboBox()
        self.period_box.setObjectName("antenna_period")
        for key, label, _ in PERIOD_SECTIONS:
            self.period_box.addItem(label, key)
        self.period_box.currentIndexChanged.connect(self._period_changed)
        top.addRow("Operating period", self.period_box)
        self.own_label = QLabel()
        self.own_label.setWordWrap(True)
        top.addRow(self.own_label)
        self.own_btn = QPushButton()
        self.own_btn.clicked.connect(self._toggle_own)
        top.addRow(self.own_btn)
        self.pattern_box = QComboBox()
        self.pattern_box.setObjectName("antenna_pattern")
        self.pattern_box.setToolTip("The pattern every service and interference check uses. "
                                    "Automatic: the standard pattern (47 CFR 73.150) for 2 or "
                                    "more towers, the tower itself for one. Theoretical: the "
                                    "bare array, a design view, not a filing.")
        for key, label in PATTERN_CHOICES:
            self.pattern_box.addItem(label, key)
        self.pattern_box.currentIndexChanged.connect(self._pattern)
        top.addRow("Pattern (47 CFR 73.150)", self.pattern_box)
        self.rotation = QLineEdit()
        self.rotation.editingFinished.connect(self._rotation)
        top.addRow("Array rotation [deg]", self.rotation)
        lay.insertLayout(0, top)
        self.heights = QLabel()
        self.heights.setWordWrap(True)
        lay.insertWidget(2, self.heights)
        self.aug_label = QLabel("Augmentations (47 CFR 73.152): field at the central azimuth "
                                "at this period's power.")
        self.aug_label.setWordWrap(True)
        lay.addWidget(self.aug_label)
        self.augmentations = AugmentationEditor(document)
        lay.addWidget(self.augmentations)

    @property
    def section(self) -> str:
        return dict((k, s) for k, _, s in PERIOD_SECTIONS)[self.period]

    def _period_changed(self, *_):
        self.period = self.period_box.currentData()
        self.DOC_PATH = (self.section, "tower")
        self.augmentations.DOC_PATH = (self.section, "augmentation")
        self.message.setText("")
        self.augmentations.message.setText("")
        self.rotation.setStyleSheet("")
        self.refresh()

    def _has_own(self) -> bool:
        return self.period == "day" or self.section in self.document.doc

    def _toggle_own(self):
        section = self.section
        if self.period == "day":
            return
        if section in self.document.doc:
            self.apply(lambda d: d.pop(section, None))
        else:  # start from the day antenna's towers
            def mutate(d):
                day = copy.deepcopy(d.get("antenna", {}))
                day.pop("augmentation", None)
                d[section] = day
            self.apply(mutate)

    def _pattern(self, *_):
        if self._loading or not self._has_own():
            return
        kind, section = self.pattern_box.currentData(), self.section

        def mutate(d):
            table = d.setdefault(section, {})
            if kind:
                table["pattern"] = kind
            else:
                table.pop("pattern", None)
        self.apply(mutate, None)

    def refresh(self):
        st = self.document.spec.station
        own = self._has_own()
        label = dict((k, lab) for k, lab, _ in PERIOD_SECTIONS)[self.period]
        if self.period == "day":
            self.own_label.setText("The day antenna; a period without its own antenna uses it.")
            self.own_btn.hide()
        else:
            self.own_btn.show()
            self.own_label.setText(
                f"{label}: its own antenna." if own else
                f"{label}: uses the day antenna at the {label.lower()} power.")
            self.own_btn.setText("Use the day antenna" if own else "Give it its own antenna")
        for w in (self.table, self.add_btn, self.del_btn, self.pattern_box, self.rotation,
                  self.augmentations):
            w.setEnabled(own)
        super().refresh()
        self.augmentations.refresh()
        fac = st.facility(self.period)
        # augmentations modify a directional array's standard pattern: shown for 2+ towers
        directional = len(fac.array.elements) > 1 or bool(self.augmentations._shown)
        self.aug_label.setVisible(directional)
        self.augmentations.setVisible(directional)
        self._loading = True
        kind = str(self.document.doc.get(self.section, {}).get("pattern", "")) if own else ""
        self.pattern_box.setCurrentIndex(max(0, self.pattern_box.findData(kind)))
        self._loading = False
        if not self.rotation.styleSheet():
            self.rotation.setText(f"{fac.array.rotation_deg:g}")
        els = fac.array.elements
        phys = ", ".join(f"{float(height_m(e.tower.height_deg, st.freq_khz)):.1f} m" for e in els)
        elec = ", ".join(f"{e.tower.height_deg:.1f}°" for e in els)
        self.heights.setText(f"At {st.freq_khz:g} kHz: {elec} electrical = {phys} (a quarter "
                             f"wave is {float(quarter_wave_m(st.freq_khz)):.1f} m). Give each "
                             "tower's height in degrees or in metres; metres stay right when the "
                             "frequency changes.")

    def _rotation(self):
        v = _number_or_text(self.rotation.text())
        section = self.section
        self.apply(lambda d: d.setdefault(section, {}).__setitem__("rotation_deg", v),
                   self.rotation)


class LevelsEditor(_TableEditor):
    COLUMNS = [("field_mv_m", "Level [mV/m]"), ("label", "Label")]

    DOC_PATH = ("contour",)


class GroundEditor(_Editor):
    def __init__(self, document, parent=None):
        super().__init__(document, parent)
        form = QFormLayout(self)
        self.preset = QComboBox()
        self.preset.addItem("custom (σ, εr below)", "")
        for name, g in GROUND_CLASSES.items():
            self.preset.addItem(f"{name}: {g.sigma_ms_m:g} mS/m, εr {g.eps_r:g}", name)
        self.preset.currentIndexChanged.connect(self._preset)
        self.sigma = QLineEdit()
        self.eps = QLineEdit()
        self.sigma.editingFinished.connect(self._custom)
        self.eps.editingFinished.connect(self._custom)
        self.zones_label = QLabel()
        self.zones_btn = QPushButton("Choose zones file…")
        self.zones_btn.clicked.connect(self._choose)
        self.zones = QTableWidget(0, 4)
        self.zones.setHorizontalHeaderLabels(["Zone (later wins)", "σ [mS/m]", "εr",
                                              "5–95 % σ"])
        header = self.zones.horizontalHeader()
        header.setSectionResizeMode(QHeaderView.ResizeToContents)
        header.setSectionResizeMode(0, QHeaderView.Stretch)  # names take the room left
        self.zones.setEditTriggers(QTableWidget.NoEditTriggers)
        self.sigma_range = QLineEdit()
        self.sigma_range.setPlaceholderText("lo, hi (empty: exact)")
        self.sigma_range.setToolTip("The 5 % and 95 % points of the default ground's "
                                    "conductivity [mS/m], for the uncertainty bands")
        self.sigma_range.editingFinished.connect(self._range)
        self.bands = QCheckBox("5–95 % bands (200 draws)")
        self.bands.setToolTip("Draw each contour's 5–95 % band over the conductivity ranges "
                              "(adds an [uncertainty] table: 200 draws, seed 1)")
        self.bands.toggled.connect(self._bands)
        form.addRow("Default ground", self.preset)
        form.addRow("σ [mS/m]", self.sigma)
        form.addRow("εr", self.eps)
        form.addRow("σ range [mS/m]", self.sigma_range)
        form.addRow(self.bands)
        form.addRow("Zones file", self.zones_label)
        form.addRow("", self.zones_btn)
        form.addRow(self.zones)
        form.addRow(self.message)

    def refresh(self):
        self._loading = True
        g = self.document.doc.get("ground", {})
        spec = self.document.spec
        idx = self.preset.findData(g.get("class", ""))
        self.preset.setCurrentIndex(max(idx, 0))
        if not self.sigma.styleSheet():  # keep a refused entry for the user to correct
            self.sigma.setText(f"{spec.ground.default.sigma_ms_m:g}")
            self.eps.setText(f"{spec.ground.default.eps_r:g}")
        if not self.sigma_range.styleSheet():
            rng = spec.ground.default_range
            self.sigma_range.setText("" if rng is None else f"{rng[0]:g}, {rng[1]:g}")
        self.bands.setChecked(spec.uncertainty is not None)
        self.zones_label.setText(g.get("zones", "(none)"))
        zs = spec.ground.zones
        self.zones.setRowCount(len(zs))
        for i, z in enumerate(zs):
            rng = "—" if z.sigma_range is None else f"{z.sigma_range[0]:g}–{z.sigma_range[1]:g}"
            for j, v in enumerate((z.name, f"{z.ground.sigma_ms_m:g}", f"{z.ground.eps_r:g}",
                                   rng)):
                item = QTableWidgetItem(v)
                item.setBackground(conductivity_colour(z.ground.sigma_ms_m, z.ground.eps_r))
                self.zones.setItem(i, j, item)
        self._loading = False

    def _preset(self):
        name = self.preset.currentData()
        if not name:
            return

        def mutate(d):
            g = d.setdefault("ground", {})
            g.pop("sigma_ms_m", None)
            g.pop("eps_r", None)
            g["class"] = name

        self.apply(mutate, self.preset)

    def _custom(self):
        s, e = _number_or_text(self.sigma.text()), _number_or_text(self.eps.text())
        g = self.document.doc.get("ground", {})
        if "class" not in g and g.get("sigma_ms_m") == s and g.get("eps_r") == e:
            return

        def mutate(d):
            gg = d.setdefault("ground", {})
            gg.pop("class", None)
            gg["sigma_ms_m"], gg["eps_r"] = s, e

        self.apply(mutate, self.sigma)

    def _range(self):
        text = self.sigma_range.text().strip()
        if text:
            parts = [p for p in text.replace("–", ",").replace(";", ",").split(",") if p.strip()]
            value = [_number_or_text(p.strip()) for p in parts]
        else:
            value = None
        if value == self.document.doc.get("ground", {}).get("sigma_range_ms_m"):
            return

        def mutate(d):
            gg = d.setdefault("ground", {})
            if value is None:
                gg.pop("sigma_range_ms_m", None)
            else:
                gg["sigma_range_ms_m"] = value

        self.apply(mutate, self.sigma_range)

    def _bands(self, on: bool):
        if self._loading or on == ("uncertainty" in self.document.doc):
            return

        def mutate(d):
            if on:
                d["uncertainty"] = {"draws": 200, "seed": 1}
            else:
                d.pop("uncertainty", None)

        self.apply(mutate)

    def _choose(self):
        path, _ = QFileDialog.getOpenFileName(self, "Conductivity zones", str(self.document.base_dir),
                                              "GeoJSON (*.geojson *.json)")
        if path:
            import os

            rel = os.path.relpath(path, self.document.base_dir)
            self.apply(lambda d: d.setdefault("ground", {}).__setitem__("zones", rel))


class NeighboursEditor(_TableEditor):
    """The study's own ``[[neighbour]]`` tables (editable) and the CSV file's (listed)."""

    COLUMNS = [("name", "Name"), ("lat", "Lat"), ("lon", "Lon"), ("freq_khz", "kHz"),
               ("power_day_kw", "Day kW"), ("power_night_kw", "Night kW"),
               ("height_deg", "Height [deg]"), ("height_m", "Height [m]"), ("array", "Array file"),
               ("loss_ohm", "Loss [Ω]"),
               ("protected_day_mv_m", "Protected day mV/m"),
               ("protected_night_mv_m", "Protected night mV/m")]

    def __init__(self, document, parent=None):
        super().__init__(document, parent)
        lay = self.layout()
        intro = QLabel("Neighbours in the study file (edit a cell; a row is used once it is "
                       "complete):")
        intro.setWordWrap(True)  # long labels must not widen the tab past the dock
        lay.insertWidget(0, intro)
        self.csv_label = QLabel()
        self.csv_label.setWordWrap(True)
        self.csv_table = QTableWidget(0, 6)
        self.csv_table.setHorizontalHeaderLabels(["Name", "kHz", "Lat", "Lon", "Day kW", "Night kW"])
        header = self.csv_table.horizontalHeader()
        header.setSectionResizeMode(QHeaderView.ResizeToContents)
        header.setSectionResizeMode(0, QHeaderView.Stretch)  # names get the room that is left
        self.csv_table.setEditTriggers(QTableWidget.NoEditTriggers)
        self.import_btn = QPushButton("Import neighbours CSV…")
        self.import_btn.clicked.connect(self._import)
        row = QHBoxLayout()  # at the top, where it is seen without scrolling
        row.addWidget(self.csv_label, 1)
        row.addWidget(self.import_btn)
        lay.insertLayout(0, row)
        self.table.setMinimumHeight(140)
        self.csv_table.setMinimumHeight(110)
        lay.addWidget(self.csv_table)
        hint = QLabel("CSV columns: name, lat, lon, freq_khz, power_day_kw, power_night_kw, "
                      "height_deg | height_m | array, loss_ohm, class, protected_day_mv_m, "
                      "protected_night_mv_m")
        hint.setWordWrap(True)
        lay.addWidget(hint)

    exclusive = (("height_deg", "height_m"), ("height_deg", "array"), ("height_m", "array"))

    DOC_PATH = ("neighbour",)

    def write_rows(self, doc, rows):
        super().write_rows(doc, rows)
        if not doc["neighbour"]:
            doc.pop("neighbour")

    def refresh(self):
        super().refresh()
        self._refresh_csv()

    def _refresh_csv(self):
        plan = self.document.spec.interference
        own = {t.get("name") for t in self.document.doc.get("neighbour", [])}
        listed = [n for n in (plan.neighbours if plan else ()) if n.name not in own]
        self.csv_table.setRowCount(len(listed))
        for i, n in enumerate(listed):
            vals = [n.name, f"{n.freq_khz:g}", f"{n.lat:.4f}", f"{n.lon:.4f}", f"{n.power_day_kw:g}",
                    f"{n.power_night_kw:g}"]
            for j, v in enumerate(vals):
                self.csv_table.setItem(i, j, QTableWidgetItem(v))
        f = plan.neighbours_file if plan else ""
        self.csv_label.setText(f"From CSV file {f}:" if f else "No neighbours CSV file")

    def import_csv(self, path: str) -> bool:
        import os

        rel = os.path.relpath(path, self.document.base_dir)
        return self.apply(lambda d: d.setdefault("interference", {}).__setitem__("neighbours", rel))

    def _import(self):
        path, _ = QFileDialog.getOpenFileName(self, "Neighbours CSV", str(self.document.base_dir),
                                              "CSV (*.csv)")
        if path:
            self.import_csv(path)


class NightEditor(_Editor):
    OFFSETS = ["co_channel", "adjacent_1", "adjacent_2", "adjacent_3"]

    def __init__(self, document, parent=None):
        super().__init__(document, parent)
        form = QFormLayout(self)
        self.method = QComboBox()
        self.method.addItem("47 CFR 73.190", "cfr")
        self.method.addItem("ITU-R P.1147", "itu")
        self.percent = QComboBox()
        self.percent.addItem("10 % of the time", 10)
        self.percent.addItem("50 % of the time", 50)
        self.exclusion = QComboBox()
        for v, t in ((50, "RSS, 50 % exclusion"), (25, "RSS, 25 % exclusion"), (0, "plain RSS")):
            self.exclusion.addItem(t, v)
        self.floor = QLineEdit()
        for w in (self.method, self.percent, self.exclusion):
            w.currentIndexChanged.connect(self._night)
        self.floor.editingFinished.connect(self._night)
        form.addRow("Sky-wave method", self.method)
        form.addRow("Interfering sky wave", self.percent)
        form.addRow("Combination", self.exclusion)
        form.addRow("Night limit floor [mV/m]", self.floor)
        self.ratios = QTableWidget(2, 4)
        self.ratios.setHorizontalHeaderLabels(["co-channel", "±1 channel", "±2", "±3"])
        self.ratios.setVerticalHeaderLabels(["day D/U [dB]", "night D/U [dB]"])
        self.ratios.horizontalHeader().setSectionResizeMode(QHeaderView.Stretch)
        self.ratios.cellChanged.connect(self._ratios)
        ratios_label = QLabel("Protection ratios (empty: none — that offset contributes "
                              "nothing)")
        ratios_label.setWordWrap(True)  # never wider than the dock
        form.addRow(ratios_label)
        form.addRow(self.ratios)
        self.sources = QLabel()
        self.sources.setWordWrap(True)
        form.addRow(self.sources)
        form.addRow(self.message)

    def refresh(self):
        self._loading = True
        plan = self.document.spec.interference
        if plan is None:
            self.setEnabled(False)
            self._loading = False
            return
        self.setEnabled(True)
        n = plan.night
        self.method.setCurrentIndex(self.method.findData(n.method))
        self.percent.setCurrentIndex(self.percent.findData(n.percent))
        self.exclusion.setCurrentIndex(self.exclusion.findData(n.exclusion_percent))
        if not self.floor.styleSheet():  # keep a refused entry for the user to correct
            self.floor.setText(f"{n.floor_mv_m:g}")
        for r, period in enumerate(("day", "night")):
            for c in range(4):
                v = plan.protection.ratios.get((period, c))
                self.ratios.setItem(r, c, QTableWidgetItem("" if v is None else f"{v[0]:g}"))
        self.sources.setText("\n".join(
            f"{row['period']} offset {row['offset_channels']}: {citation(row['source'])[0]}"
            + ("" if citation(row["source"])[1] else " †")
            for row in plan.protection.rows() if row["ratio_db"] is not None)
            + "\n† not yet checked against the published text (docs/methods.md lists them)")
        self._loading = False

    def _night(self, *_):
        if self._loading:
            return
        n = self.document.spec.interference.night
        floor = _number_or_text(self.floor.text())
        vals = {k: v for k, v, now in (
            ("method", self.method.currentData(), n.method),
            ("percent", self.percent.currentData(), n.percent),
            ("exclusion_percent", self.exclusion.currentData(), n.exclusion_percent),
            ("floor_mv_m", floor, f"{n.floor_mv_m:g}" if isinstance(floor, str) else n.floor_mv_m),
        ) if v != now}  # only what the user changed; the file keeps the rest as it was
        if not vals:
            self.floor.setStyleSheet("")
            return
        self.apply(lambda d: d.setdefault("night", {}).update(vals), self.floor)

    def _ratios(self, row, col):
        """Only the edited cell changes the study: a number sets that row of [protection], an
        empty cell takes the row back to the plan's; every other key (plan, raster, other rows)
        stays as the file has it."""
        if self._loading:
            return
        period, name = ("day", "night")[row], self.OFFSETS[col]
        key = f"{period}_{name}_db"
        item = self.ratios.item(row, col)
        text = item.text().strip() if item else ""
        shown = self.document.spec.interference.protection.ratios.get((period, col))
        if text == ("" if shown is None else f"{shown[0]:g}"):
            return  # the cell holds what it showed: nothing changed

        def mutate(d):
            prot = d.setdefault("protection", {})
            if text:
                prot[key] = _number_or_text(text)
            else:
                prot.pop(key, None)

        self.apply(mutate)


# --- result views ---------------------------------------------------------------------------

class RowsModel(QAbstractTableModel):
    """A read-only table model over Python rows (lazy: Qt asks only for visible cells)."""

    def __init__(self, parent=None):
        super().__init__(parent)
        self.headers: list[str] = []
        self.row_headers: list[str] | None = None
        self.rows: list[tuple] = []
        self.sort_keys: list[tuple] = []
        self.bad: list[bool] = []

    def set_rows(self, headers, rows, row_headers=None, sort_keys=None, bad=None):
        self.beginResetModel()
        self.headers, self.rows, self.row_headers = list(headers), list(rows), row_headers
        self.sort_keys = list(sort_keys) if sort_keys is not None else list(rows)
        self.bad = list(bad) if bad is not None else [False] * len(self.rows)
        self.endResetModel()

    def rowCount(self, parent=QModelIndex()):  # noqa: N802 - Qt API
        return 0 if parent.isValid() else len(self.rows)

    def columnCount(self, parent=QModelIndex()):  # noqa: N802
        return 0 if parent.isValid() else len(self.headers)

    def data(self, index, role=Qt.DisplayRole):
        if not index.isValid():
            return None
        if role == Qt.DisplayRole:
            return self.rows[index.row()][index.column()]
        if role == Qt.UserRole:
            return self.sort_keys[index.row()][index.column()]
        if role == Qt.ForegroundRole and self.bad[index.row()]:
            return QColor("#b00020")
        return None

    def headerData(self, section, orientation, role=Qt.DisplayRole):  # noqa: N802
        if role != Qt.DisplayRole:
            return None
        if orientation == Qt.Horizontal:
            return self.headers[section] if section < len(self.headers) else None
        if self.row_headers is not None and section < len(self.row_headers):
            return self.row_headers[section]
        return str(section + 1)


class _RowsView(QTableView):
    def __init__(self, sortable: bool, parent=None):
        super().__init__(parent)
        self.model_ = RowsModel(self)
        if sortable:
            self.proxy = QSortFilterProxyModel(self)
            self.proxy.setSourceModel(self.model_)
            self.proxy.setSortRole(Qt.UserRole)
            self.setModel(self.proxy)
            self.setSortingEnabled(True)
        else:
            self.setModel(self.model_)
        self.setEditTriggers(QTableView.NoEditTriggers)
        # compact rows, and the columns share the width once they have what they need
        self.verticalHeader().setDefaultSectionSize(self.fontMetrics().height() + 6)
        self.horizontalHeader().setStretchLastSection(True)

    def rowCount(self) -> int:  # noqa: N802 - mirrors QTableWidget for callers and tests
        return self.model_.rowCount()

    def header_text(self, column: int) -> str:
        return self.model_.headers[column]

    def fit_columns(self) -> None:
        """Column widths from the header texts and the first rows (cheap, unlike resizing to
        every cell)."""
        fm = self.fontMetrics()
        sample = self.model_.rows[:50]
        for j, head in enumerate(self.model_.headers):
            texts = [head] + [str(r[j]) for r in sample]
            self.setColumnWidth(j, max(fm.horizontalAdvance(t) for t in texts) + 28)


class RadialTable(_RowsView):
    """Bearing × level distances, in km or mi."""

    def __init__(self, parent=None):
        super().__init__(False, parent)
        self.units = "km"
        self.result = None

    def show_result(self, result, units: str | None = None):
        self.result = result
        self.units = units or self.units
        f = 1.0 if self.units == "km" else 1 / KM_PER_MI
        cs = result.contours
        b = result.radials.bearings_deg
        rows = []
        for i in range(b.size):
            row = []
            for c in cs:
                d = c.first_km[i]
                row.append("n/r" if np.isnan(d) else (f">{result.max_km * f:.1f}" if np.isinf(d)
                           else f"{d * f:.2f}" + ("*" if c.further[i] else "")))
            rows.append(tuple(row))
        self.model_.set_rows([f"{c.level_mv_m:g} mV/m [{self.units}]" for c in cs], rows,
                             [f"{x:g}°" for x in b])
        self.fit_columns()

    def cell_value(self, bearing_deg: float, level_index: int) -> str:
        b = self.result.radials.bearings_deg
        i = int(np.flatnonzero(np.isclose(b, bearing_deg))[0])
        return self.model_.rows[i][level_index]


class ProfilePlot(QWidget):
    """Field versus distance along one bearing, ground sections shaded, levels drawn."""

    def __init__(self, parent=None):
        super().__init__(parent)
        lay = QVBoxLayout(self)
        row = QHBoxLayout()
        row.addWidget(QLabel("Bearing [deg true]"))
        self.bearing = QDoubleSpinBox()  # the study may have bearings such as 137.5°
        self.bearing.setDecimals(1)
        self.bearing.setRange(0.0, 359.9)
        self.bearing.setWrapping(True)
        self.bearing.setSuffix("°")
        self.bearing.valueChanged.connect(self._draw)
        self.shown_bearing = QLabel("")
        row.addWidget(self.shown_bearing)
        row.addWidget(self.bearing)
        row.addStretch(1)
        lay.addLayout(row)
        self.plot = pg.PlotWidget(background="w")
        self.plot.showGrid(x=True, y=True, alpha=0.3)
        lay.addWidget(self.plot)
        self.result = None
        self.units = "km"
        self.field_units = "dBu"

    def show_result(self, result, units=None, field_units=None):
        self.result = result
        self.units = units or self.units
        self.field_units = field_units or self.field_units
        self._draw()

    def _draw(self, *_):
        self.plot.clear()
        r = self.result
        if r is None:
            return
        b = r.radials.bearings_deg
        i = int(np.argmin(np.abs((b - self.bearing.value() + 180) % 360 - 180)))
        self.shown_bearing.setText(f"radial shown: {b[i]:g}°")
        f = 1.0 if self.units == "km" else 1 / KM_PER_MI
        d = r.radials.dist_km * f
        e = r.radials.field_dbu[i]
        for s in r.radials.sections[i]:
            c = conductivity_colour(s.ground.sigma_ms_m, s.ground.eps_r)
            c.setAlpha(110)
            reg = pg.LinearRegionItem((s.start_km * f, min(s.end_km, r.radials.dist_km[-1]) * f),
                                      movable=False, brush=c, pen=pg.mkPen(None))
            reg.setZValue(-10)
            self.plot.addItem(reg)
        if self.field_units == "dBu":
            self.plot.plot(d, e, pen=pg.mkPen("k", width=2))
            self.plot.setLabel("left", "field [dBµV/m]")
        else:
            self.plot.plot(d, 10 ** (e / 20) / 1e3, pen=pg.mkPen("k", width=2))
            self.plot.setLogMode(y=True)
            self.plot.setLabel("left", "field [mV/m]")
        # the levels as lines named in a legend (labels on the lines collide where levels lie
        # a few dB apart)
        if self.plot.plotItem.legend is None:
            self.plot.addLegend(offset=(-10, 10), labelTextSize="8pt", brush=(255, 255, 255, 230),
                                pen=(150, 150, 150), labelTextColor=(20, 20, 20))
        self.plot.plotItem.legend.clear()
        x_end = d[-1]
        for c in r.contours:
            y = float(mv_m_to_dbu(c.level_mv_m)) if self.field_units == "dBu" else c.level_mv_m
            colour = level_colour(c.level_mv_m).name()
            self.plot.plot([d[0], x_end], [y, y], name=f"{c.level_mv_m:g} mV/m",
                           pen=pg.mkPen(colour, width=1.6, style=Qt.DashLine))
        self.plot.setLabel("bottom", f"distance [{self.units}] along {b[i]:g}°")


class PatternPlot(QWidget):
    """Horizontal (polar) and vertical patterns of each operating period's antenna, in mV/m at
    1 km at that period's power: theoretical, standard and augmented overlaid."""

    PENS = {"theoretical": ("#7f7f7f", Qt.DashLine), "standard": ("#2166ac", Qt.SolidLine),
            "augmented": ("#b2182b", Qt.SolidLine)}

    def __init__(self, parent=None):
        super().__init__(parent)
        outer = QVBoxLayout(self)
        row = QHBoxLayout()
        row.addWidget(QLabel("Operating period"))
        self.period_box = QComboBox()
        self.period_box.setObjectName("pattern_period")
        self.period_box.currentIndexChanged.connect(self._draw)
        row.addWidget(self.period_box)
        self.caption = QLabel()
        self.caption.setWordWrap(True)
        row.addWidget(self.caption, 1)
        outer.addLayout(row)
        lay = QHBoxLayout()
        self.polar = pg.PlotWidget(background="w", title="horizontal plane [mV/m at 1 km]")
        self.polar.setAspectLocked(True)
        self.polar.hideAxis("left")
        self.polar.hideAxis("bottom")
        self.vert = pg.PlotWidget(background="w", title="vertical, toward the maximum")
        self.vert.setLabel("bottom", "elevation [deg]")
        self.vert.setLabel("left", "mV/m at 1 km")
        lay.addWidget(self.polar)
        lay.addWidget(self.vert)
        outer.addLayout(lay, 1)
        self.values = None  # the pattern the rules use, every degree (for tests and readers)
        self.curves: dict = {}
        self.result = None

    def show_result(self, result):
        from mwreach.coverage.station import period_rows

        self.result = result
        keep = self.period_box.currentData()
        self.period_box.blockSignals(True)
        self.period_box.clear()
        for row in period_rows(result.spec.station):
            own = "" if row["own_facility"] else " (day antenna)"
            self.period_box.addItem(f"{row['period']}{own}", row["period"])
        i = self.period_box.findData(keep)
        self.period_box.setCurrentIndex(max(i, 0))
        self.period_box.blockSignals(False)
        self._draw()

    def _pen(self, name):
        colour, style = self.PENS[name]
        return pg.mkPen(colour, width=2, style=style)

    def _draw(self, *_):
        if self.result is None:
            return
        st = self.result.spec.station
        period = self.period_box.currentData() or "day"
        p = (self.result.antenna_summary["power_kw"] if period == "day"
             else st.power_kw(period))
        if p <= 0:
            p = 1.0  # a period without power: its shape, at 1 kW
        rad = st.radiator(period)
        arr = st.facility(period).array
        az = np.arange(0.0, 361.0)
        curves = {"theoretical": arr.field_mv_m(az, 0.0, p)}
        if rad.kind == "standard":
            scale = np.sqrt(p / rad.power_kw)
            curves["standard"] = scale * rad.unaugmented_mv_m(az, 0.0)
            if rad.augmentations:
                curves["augmented"] = rad.field_mv_m(az, 0.0, p)
        used = rad.field_mv_m(az, 0.0, p)
        self.values = used[:360]
        self.curves = {k: v[:360] for k, v in curves.items()}
        parts = [f"{format_kw(p)} kW"]
        if rad.kind == "standard":
            parts.append(f"standard pattern RMS {rad.rms_mv_m(p):.1f} mV/m, theoretical "
                         f"{arr.rms_mv_m(p):.1f} mV/m, Q {float(rad.q_mv_m(0.0)) * scale:.2f} mV/m")
        else:
            parts.append(f"RMS {arr.rms_mv_m(p):.1f} mV/m")
        self.caption.setText("; ".join(parts) + ". Grey dashed: theoretical; blue: standard; "
                             "red: augmented")
        self.polar.clear()
        r_max = float(max(c.max() for c in curves.values())) or 1.0
        for frac in (0.25, 0.5, 0.75, 1.0):
            t = np.radians(np.arange(0, 361))
            self.polar.plot(frac * r_max * np.sin(t), frac * r_max * np.cos(t),
                            pen=pg.mkPen((180, 180, 180), width=1))
        for ang in range(0, 360, 30):
            a = np.radians(ang)
            self.polar.plot([0, r_max * np.sin(a)], [0, r_max * np.cos(a)],
                            pen=pg.mkPen((200, 200, 200), width=1))
            txt = pg.TextItem(f"{ang}°", color=(90, 90, 90), anchor=(0.5, 0.5))
            txt.setPos(1.2 * r_max * np.sin(a), 1.2 * r_max * np.cos(a))  # clear of the circle
            self.polar.addItem(txt)
        t = np.radians(az)
        for name, e in curves.items():
            self.polar.plot(e * np.sin(t), e * np.cos(t), pen=self._pen(name))
        el = np.arange(0.0, 90.5, 0.5)
        az_max = float(az[int(np.argmax(used))])
        self.vert.clear()
        self.vert.setTitle(f"vertical, toward the maximum ({az_max:g}°)")
        self.vert.plot(el, arr.field_mv_m(az_max, el, p), pen=self._pen("theoretical"))
        if rad.kind == "standard":
            self.vert.plot(el, rad.field_mv_m(az_max, el, p),
                           pen=self._pen("augmented" if rad.augmentations else "standard"))


class InterferenceTable(_RowsView):
    """Every D/U check with its margin; sortable (worst first); failures in red."""

    def __init__(self, parent=None):
        super().__init__(True, parent)
        self.field_units = "dBu"

    @property
    def HEAD(self):
        unit = "mV/m" if self.field_units == "mV/m" else "dBµV/m"
        return ["Check", "Neighbour", "Offset", "Margin dB", "Result", "By", f"Wanted {unit}",
                f"Unwanted {unit}", "Ratio dB", "Bearing°", "Lat", "Lon"]

    #: from the order rows are built in (check, neighbour, offset, bearing, lat, lon, wanted,
    #: unwanted, ratio, margin, result, by) to the order shown (:attr:`HEAD`)
    COLUMN_ORDER = (0, 1, 2, 9, 10, 11, 6, 7, 8, 3, 4, 5)

    def _field(self, dbu: float) -> str:
        return mv_m_text(dbu) if self.field_units == "mV/m" else field_text(dbu)

    def show_result(self, result):
        inter = result.interference
        rows, keys, bad = [], [], []
        for r in (inter.rows if inter else ()):
            vals = (r.kind, r.neighbour, r.offset_channels, r.bearing_deg, r.lat, r.lon,
                    r.wanted_dbu, r.unwanted_dbu, r.ratio_db, r.margin_db,
                    "pass" if r.passed else "FAILS", f"{r.mechanism} wave")
            keys.append(vals)
            rows.append((r.kind, r.neighbour, f"{r.offset_channels:g}", f"{r.bearing_deg:g}",
                         f"{r.lat:.4f}", f"{r.lon:.4f}", self._field(r.wanted_dbu),
                         self._field(r.unwanted_dbu), f"{r.ratio_db:g}",
                         margin_text(r.margin_db, 2), vals[10], vals[11]))
            bad.append(not r.passed)
        # the checks that are not a D/U at a point: entry into a neighbour's night limit and
        # day contour overlap (margin column: minus the rise in dB, minus the overlap in km²)
        for row in (inter.neighbour_summary() if inter else ()):
            if row["kind"] not in ("night limit entry", "day overlap"):
                continue
            c = summary_cells(row)
            margin = (row["worst_margin_db"] if row["kind"] == "night limit entry"
                      else -row["overlap_km2"])
            vals = (row["kind"], row["neighbour"], c["offset"], "", row["lat"] or 0.0,
                    row["lon"] or 0.0, "", "", "", margin, c["result"], c["by"])
            keys.append(vals)
            value = (margin_text(margin, 2) if row["kind"] == "night limit entry"
                     else c["value"])
            rows.append((row["kind"], row["neighbour"], c["offset"], "", c["at"].split(", ")[0],
                         c["at"].split(", ")[-1], "", "", "", value, c["result"], c["by"]))
            bad.append(not row["passed"])
        n_du = len(inter.rows) if inter else 0
        # the per-neighbour checks first (failures on top), then every D/U, worst margin first
        order = (sorted(range(n_du, len(rows)), key=lambda i: (not bad[i], keys[i][9]))
                 + sorted(range(n_du), key=lambda i: keys[i][9]))
        self.proxy.sort(-1)  # no re-sort by the proxy on reset: rows arrive sorted

        def shown(t):  # the deciding columns first, so they stay in view on a narrow window
            return tuple(t[j] for j in self.COLUMN_ORDER)

        self.model_.set_rows(self.HEAD, [shown(rows[i]) for i in order],
                             sort_keys=[shown(keys[i]) for i in order],
                             bad=[bad[i] for i in order])
        self.horizontalHeader().setSortIndicator(3, Qt.AscendingOrder)
        self.fit_columns()


def max_power_text(result) -> str:
    """The maximum day and night power lines of a full result (what limits each: a neighbour,
    the overlap rule or the class's power range), as the sheet prints them."""
    inter = result.interference
    if inter is None:
        return "No interference study: the study lists no neighbours."
    return "\n".join(describe_max_power(period, mp) for period, mp in inter.max_power.items())
