"""Saving without losing anything: single files and whole output sets.

- :func:`atomic_write` writes one file through a temporary file beside it, flushes it to disk,
  reads it back (and checks it, when asked), keeps the old file's permissions and only then
  renames it over the old one.
- :func:`write_set` writes a run's outputs as a set: every file goes into a temporary folder
  beside the output folder first; only when all are written and read back are they swapped in,
  with the old set kept aside until the swap is complete and put back if it fails. A failure
  (disk full, permission, interruption) leaves the old set complete and no temporaries behind.
- :func:`refuse_overwriting_inputs` stops a run whose outputs would replace a file it reads.
- :func:`csv_writer` writes CSV whose text cells a spreadsheet will not run as formulas.

Every error is a ``ValueError`` with one line naming the file or folder.
"""

from __future__ import annotations

import os
import pathlib
import shutil
import stat
import tempfile

__all__ = ["atomic_write", "write_set", "refuse_overwriting_inputs", "writable_folder",
           "csv_writer", "csv_cell", "TMP_PREFIX"]

TMP_PREFIX = ".mwreach-"


_FORMULA_START = ("=", "+", "-", "@", "\t", "\r")


def csv_cell(value):
    """A cell that a spreadsheet shows as text: a text cell that begins with ``=``, ``+``,
    ``-``, ``@``, a tab or a carriage return gets a leading apostrophe, unless it is a number
    (``-46.20000`` stays a number). Common practice, no published standard: the OWASP
    "CSV injection" advice."""
    if isinstance(value, str) and value.startswith(_FORMULA_START):
        try:
            float(value)
        except ValueError:
            return "'" + value
    return value


class _SafeWriter:
    def __init__(self, writer):
        self._w = writer

    def writerow(self, row):
        return self._w.writerow([csv_cell(v) for v in row])

    def writerows(self, rows):
        for row in rows:
            self.writerow(row)


def csv_writer(buf):
    """``csv.writer(buf)`` with "\n" line ends whose rows pass through :func:`csv_cell`: every
    CSV the tool writes goes through it."""
    import csv

    return _SafeWriter(csv.writer(buf, lineterminator="\n"))


def _os_message(exc: OSError, path) -> str:
    reason = exc.strerror or type(exc).__name__
    return f"{path}: cannot write ({reason})"


def _fsync_dir(folder: pathlib.Path) -> None:
    """Flush a folder's entries (the renames) to disk where the system allows it; some file
    systems refuse to open or flush a folder, and the files themselves are already flushed."""
    import contextlib

    try:
        fd = os.open(folder, os.O_RDONLY)
    except OSError:
        return
    with contextlib.suppress(OSError):
        os.fsync(fd)
    os.close(fd)


def _default_mode() -> int:
    umask = os.umask(0)
    os.umask(umask)
    return 0o666 & ~umask


def _write_bytes(path: pathlib.Path, data: bytes, mode: int) -> None:
    """Write, flush to disk, set the mode, and read back byte for byte."""
    with open(path, "wb") as fh:
        fh.write(data)
        fh.flush()
        os.fsync(fh.fileno())
    os.chmod(path, mode)
    if path.read_bytes() != data:
        raise OSError(5, "read-back differs from what was written")


def writable_folder(folder) -> pathlib.Path:
    """Create ``folder`` if missing and check that files can be written into it."""
    folder = pathlib.Path(folder)
    if folder.exists() and not folder.is_dir():
        raise ValueError(f"{folder}: is a file, not a folder")
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except FileExistsError:
        raise ValueError(f"{folder}: a file stands in the way of this folder") from None
    except NotADirectoryError:
        raise ValueError(f"{folder}: a part of this path is a file, not a folder") from None
    except OSError as exc:
        raise ValueError(f"{folder}: cannot create the folder ({exc.strerror})") from None
    if not os.access(folder, os.W_OK | os.X_OK):
        raise ValueError(f"{folder}: folder is not writable")
    return folder


def atomic_write(path, content, check=None) -> pathlib.Path:
    """Replace ``path`` with ``content`` (str → UTF-8, or bytes) in one step.

    ``check(data: bytes)`` may inspect what was read back and raise ValueError to keep the old
    file. The new file takes the old file's permissions (or the usual ones for a new file).
    """
    path = pathlib.Path(path)
    data = content.encode("utf-8") if isinstance(content, str) else bytes(content)
    if path.is_dir():
        raise ValueError(f"{path}: is a folder; give a file name")
    folder = writable_folder(path.parent)
    mode = stat.S_IMODE(path.stat().st_mode) if path.exists() else _default_mode()
    try:
        fd, tmp = tempfile.mkstemp(dir=folder, prefix=f"{TMP_PREFIX}{path.name}.", suffix=".tmp")
    except OSError as exc:
        raise ValueError(_os_message(exc, path)) from None
    os.close(fd)
    tmp = pathlib.Path(tmp)
    try:
        _write_bytes(tmp, data, mode)
        if check is not None:
            check(tmp.read_bytes())
        os.replace(tmp, path)
        _fsync_dir(folder)
    except OSError as exc:
        tmp.unlink(missing_ok=True)
        raise ValueError(_os_message(exc, path)) from None
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise
    return path


def refuse_overwriting_inputs(out_dir, names, inputs) -> None:
    """Raise when an output ``out_dir/name`` is one of the files the run reads."""
    out_dir = pathlib.Path(out_dir)
    read = {pathlib.Path(p).resolve() for p in inputs}
    for name in names:
        target = (out_dir / name).resolve()
        if target in read:
            raise ValueError(f"refusing to write {out_dir / name}: the study reads that file "
                             f"({target}); choose another output folder")


def _clean_stale(parent: pathlib.Path, stem: str) -> None:
    """Remove temporaries that an interrupted earlier run left beside the output folder."""
    for p in parent.glob(f"{TMP_PREFIX}{stem}.*"):
        if p.is_dir() and not p.is_symlink():
            shutil.rmtree(p, ignore_errors=True)


def write_set(out_dir, files: dict, known_names=(), inputs=()) -> list[pathlib.Path]:
    """Write ``files`` ({name: str | bytes}) into ``out_dir`` as one complete set.

    Files named in ``known_names`` that the new set does not hold (outputs of an earlier run
    with other options) are removed in the same swap, so the folder never mixes two runs.
    Outputs whose names are files that the run reads (``inputs``) are refused before anything
    is written. Returns the paths written.
    """
    out = pathlib.Path(out_dir)
    refuse_overwriting_inputs(out, list(files) + list(known_names), inputs)
    out = writable_folder(out)
    parent = out.resolve().parent
    stem = out.resolve().name
    _clean_stale(parent, stem)
    try:
        stage = pathlib.Path(tempfile.mkdtemp(dir=parent, prefix=f"{TMP_PREFIX}{stem}.new."))
        old = pathlib.Path(tempfile.mkdtemp(dir=parent, prefix=f"{TMP_PREFIX}{stem}.old."))
    except OSError:
        # the parent folder is not writable: stage inside the output folder instead
        parent = out
        stage = pathlib.Path(tempfile.mkdtemp(dir=out, prefix=f"{TMP_PREFIX}new."))
        old = pathlib.Path(tempfile.mkdtemp(dir=out, prefix=f"{TMP_PREFIX}old."))
    moved_old: list[str] = []
    placed: list[str] = []
    try:
        for name, content in files.items():
            data = content.encode("utf-8") if isinstance(content, str) else bytes(content)
            target = out / name
            mode = stat.S_IMODE(target.stat().st_mode) if target.is_file() else _default_mode()
            _write_bytes(stage / name, data, mode)
        _fsync_dir(stage)
        # swap: old outputs aside, new ones in
        for name in dict.fromkeys([*files, *known_names]):
            if (out / name).is_file():
                os.replace(out / name, old / name)
                moved_old.append(name)
        for name in files:
            os.replace(stage / name, out / name)
            placed.append(name)
        _fsync_dir(out)
    except BaseException as exc:
        for name in placed:  # roll back: the old set comes back complete
            (out / name).unlink(missing_ok=True)
        for name in moved_old:
            os.replace(old / name, out / name)
        shutil.rmtree(stage, ignore_errors=True)
        shutil.rmtree(old, ignore_errors=True)
        if isinstance(exc, OSError):
            where = getattr(exc, "filename", None) or out
            raise ValueError(f"{out}: outputs not written, the previous ones are kept "
                             f"({exc.strerror or exc} at {pathlib.Path(where).name})") from None
        raise
    shutil.rmtree(stage, ignore_errors=True)
    shutil.rmtree(old, ignore_errors=True)
    return [out / name for name in files]
