"""The open study as an editable TOML document, validated by the core on every change."""

from __future__ import annotations

import copy
import os
import pathlib

from PySide6.QtCore import QObject, Signal

from mwreach.coverage.inputs import (check_round_trip, dump_toml_keeping, load_study_doc,
                                     parse_study)
from mwreach.coverage.safefiles import atomic_write
from mwreach.coverage.spec import StudySpec

__all__ = ["StudyDocument", "DEMO_PATH"]

DEMO_PATH = pathlib.Path(__file__).resolve().parents[1] / "data" / "demo" / "quellmoor.toml"


def _relative_paths(doc: dict):
    """(getter, setter) pairs for every file name a study document holds."""
    out = []
    for sec, key in (("ground", "zones"), ("community", "boundary"), ("interference", "neighbours"),
                     ("population", "file")):
        t = doc.get(sec)
        if isinstance(t, dict) and t.get(key):
            out.append((t, key))
    for t in doc.get("neighbour", []) or []:
        for key in ("array", "array_night"):
            if isinstance(t, dict) and t.get(key):
                out.append((t, key))
    return out


class StudyDocument(QObject):
    """Holds the TOML document and the validated :class:`StudySpec` built from it.

    Every edit goes through :meth:`try_update`: the change is applied to a copy, validated by
    :func:`parse_study`, and kept only if valid. A refused edit leaves the study unchanged and
    returns the message to show beside the field.
    """

    changed = Signal()  # the spec changed: recompute
    dirtyChanged = Signal(bool)
    pathChanged = Signal(str)

    def __init__(self, parent=None):
        super().__init__(parent)
        self.doc: dict = {}
        self.spec: StudySpec | None = None
        self.path: pathlib.Path | None = None  # None until saved
        self.base_dir = DEMO_PATH.parent
        self.dirty = False

    @property
    def display_name(self) -> str:
        return self.path.name if self.path else "untitled (from demo)"

    def _set_dirty(self, dirty: bool):
        if dirty != self.dirty:
            self.dirty = dirty
            self.dirtyChanged.emit(dirty)

    def _validate(self, doc: dict) -> StudySpec:
        name = self.path if self.path else self.base_dir / "untitled.toml"
        return parse_study(doc, name)

    def load(self, path) -> None:
        path = pathlib.Path(path).resolve()
        doc, spec = load_study_doc(path)
        self.path, self.base_dir = path, path.parent
        self.spec, self.doc = spec, doc
        self._set_dirty(False)
        self.pathChanged.emit(str(path))
        self.changed.emit()

    def new_from_demo(self) -> None:
        doc, spec = load_study_doc(DEMO_PATH)
        self.path, self.base_dir = None, DEMO_PATH.parent
        self.spec, self.doc = spec, doc
        self._set_dirty(True)
        self.pathChanged.emit("")
        self.changed.emit()

    def try_update(self, mutate) -> str | None:
        """Apply ``mutate(doc_copy)``; keep it if the study stays valid. Returns an error or None."""
        doc = copy.deepcopy(self.doc)
        try:
            mutate(doc)
            spec = self._validate(doc)
        except (ValueError, KeyError, TypeError) as exc:
            return str(exc)
        self.doc, self.spec = doc, spec
        self._set_dirty(True)
        self.changed.emit()
        return None

    def set_site_quiet(self, lat: float, lon: float) -> None:
        """Record a dragged site in the document without a full re-validation."""
        self.doc.setdefault("station", {})["lat"] = round(float(lat), 6)
        self.doc["station"]["lon"] = round(float(lon), 6)
        self.spec = self.spec.with_site(self.doc["station"]["lat"], self.doc["station"]["lon"])
        self._set_dirty(True)
        self.changed.emit()

    def save(self, path=None) -> pathlib.Path:
        """Write the study. The text is read back by the study parser before it replaces the old
        file: if it would not open again as the same study, the old file stays and ValueError
        says why. Saving into another folder rewrites relative file names."""
        target = pathlib.Path(path).resolve() if path else self.path
        if target is None:
            raise ValueError("choose a file name to save the study")
        own = self.path.resolve() if self.path else None
        for read in self.spec.input_files if self.spec is not None else ():
            if pathlib.Path(read).resolve() == target and target != own:
                raise ValueError(f"{target}: not saved; the study reads that file (its zones, "
                                 "boundary, neighbours or an array): choose another name")
        doc = copy.deepcopy(self.doc)
        if target.parent != self.base_dir:
            for table, key in _relative_paths(doc):
                absolute = (self.base_dir / table[key]).resolve()
                table[key] = os.path.relpath(absolute, target.parent)
        original = None  # the text the study was read from: its comments and layout are kept
        source = self.path if self.path is not None else (DEMO_PATH if self.doc else None)
        if source is not None:
            try:
                original = source.read_text(encoding="utf-8-sig")
            except (OSError, UnicodeDecodeError):
                original = None
        try:
            text = dump_toml_keeping(doc, original)
        except (TypeError, ValueError) as exc:
            raise ValueError(f"{target}: not saved ({exc})") from None
        atomic_write(target, text,
                     check=lambda data: check_round_trip(doc, data.decode("utf-8"), target))
        self.doc, self.path, self.base_dir = doc, target, target.parent
        self.spec = self._validate(doc)
        self._set_dirty(False)
        self.pathChanged.emit(str(target))
        return target
