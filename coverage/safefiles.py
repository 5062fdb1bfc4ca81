"""Saving without losing anything: single files and whole output sets.

- :func:`atomic_write` writes one file through a temporary file beside it, flushes it to disk,
  reads it back (and checks it, when asked), keeps the old file's permissions and only then
  renames it over the old one. A symbolic link is written through to its target; a device,
  pipe or socket is refused.
- :func:`write_set` writes a run's outputs as a set. Runs into one folder take turns (a lock
  on the folder). Every file is staged in a hidden folder inside the output folder; only when
  all are written and read back is a journal written and the swap done (old files aside, new
  ones in). A failure rolls back at once; a kill during the swap leaves the journal, and the
  next writer (or :func:`recover`) rolls it back from what is on disk before anything else.
- :func:`refuse_overwriting_inputs` stops a run whose outputs would replace a file it reads.
- :func:`csv_writer` writes CSV whose text cells a spreadsheet will not run as formulas.

Every error is a ``ValueError`` with one line naming the file or folder.
"""

from __future__ import annotations

import contextlib
import os
import pathlib
import shutil
import stat
import tempfile
import time

__all__ = ["atomic_write", "write_set", "recover", "refuse_overwriting_inputs",
           "writable_folder", "csv_writer", "csv_cell", "json_text", "TMP_PREFIX"]

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


def _finite(obj):
    import math

    if isinstance(obj, float):
        return obj if math.isfinite(obj) else None
    if isinstance(obj, dict):
        return {k: _finite(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_finite(v) for v in obj]
    if hasattr(obj, "dtype") and hasattr(obj, "tolist"):  # numpy scalars and arrays
        return _finite(obj.tolist())
    return obj


def json_text(obj, indent=None) -> str:
    """JSON that any reader accepts: NaN and ±Infinity, which JSON cannot hold (RFC 8259 §6),
    become null, and the text ends with a newline. Every JSON output goes through it; where a
    null can appear, the output's notes say what it means."""
    import json

    return json.dumps(_finite(obj), indent=indent, ensure_ascii=False, allow_nan=False) + "\n"


def _os_message(exc: OSError, path) -> str:
    reason = exc.strerror or type(exc).__name__
    return f"{path}: cannot write ({reason})"


def _fsync_dir(folder: pathlib.Path) -> None:
    """Flush a folder's entries (the renames) to disk where the system allows it; some file
    systems refuse to open or flush a folder, and the files themselves are already flushed."""
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
    if str(folder).strip() == "":
        raise ValueError("the output folder is empty; give a folder name")
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
    if str(path).strip() == "":
        raise ValueError("the file name is empty; give a file name")
    data = content.encode("utf-8") if isinstance(content, str) else bytes(content)
    if path.is_symlink():  # write through the link: the link stays a link
        path = path.resolve()
    if path.is_dir():
        raise ValueError(f"{path}: is a folder; give a file name")
    if path.exists() and not path.is_file():
        raise ValueError(f"{path}: is not a regular file (a device, pipe or socket); "
                         "give a file name")
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


JOURNAL = f"{TMP_PREFIX}swap.json"
LOCK_WAIT_S = 60.0  # how long a run waits for another run writing into the same folder

placed_sets: list[pathlib.Path] = []  # output folders whose new set this process put in place


def _step(label: str) -> None:
    """A named point inside :func:`write_set` (tests pause or kill a writer here)."""


@contextlib.contextmanager
def _folder_lock(folder: pathlib.Path):
    """Hold an exclusive lock on ``folder`` (flock on the folder itself: no file is left
    behind, and the system drops the lock when its holder dies). Runs into one folder take
    turns; a run that waits longer than LOCK_WAIT_S gives up with one line."""
    try:
        import fcntl
    except ImportError:  # no flock on this system: runs are not serialised
        yield
        return
    fd = os.open(folder, os.O_RDONLY)
    try:
        deadline = time.monotonic() + LOCK_WAIT_S
        while True:
            try:
                fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
                break
            except BlockingIOError:
                if time.monotonic() > deadline:
                    raise ValueError(f"{folder}: another mwreach run is writing into this "
                                     f"folder (waited {LOCK_WAIT_S:g} s); nothing was "
                                     "replaced") from None
                time.sleep(0.02)
        yield
    finally:
        os.close(fd)


@contextlib.contextmanager
def _signals_held():
    """Ctrl-C and SIGTERM wait until the swap is complete (their Python handlers are set only
    in the main thread): a run is then interrupted before its swap, with nothing replaced, or
    after it, with the new set whole."""
    import signal
    import threading

    if threading.current_thread() is not threading.main_thread():
        yield
        return
    held: list[int] = []
    previous = {sig: signal.signal(sig, lambda signum, frame: held.append(signum))
                for sig in (signal.SIGINT, signal.SIGTERM)}
    try:
        yield
    finally:
        for sig, handler in previous.items():
            signal.signal(sig, handler)
        for sig in dict.fromkeys(held):
            signal.raise_signal(sig)  # now, with the handler the program had


def _roll_back(out: pathlib.Path, journal: dict) -> None:
    """Put the old set back from what is on disk, step by step and repeatably: a new file no
    longer in the staging folder was placed, so it goes back there; then every old file comes
    back from the folder it was moved aside into. A second run of this after a kill half-way
    through finds the same answer, so the only complete set is never deleted."""
    stage, old = out / journal["stage"], out / journal["old"]
    for name in journal["new"]:
        if not (stage / name).exists() and (out / name).exists():
            os.replace(out / name, stage / name)
    if old.is_dir():
        for f in sorted(old.iterdir()):
            os.replace(f, out / f.name)
    _fsync_dir(out)


def _recover(out: pathlib.Path) -> list[str]:
    """Under the folder's lock: finish what a killed run left. An interrupted swap (its journal
    is still there) is rolled back; staging folders of runs that are gone are removed (the lock
    proves their owners are no longer writing). Returns notes of what was done."""
    import json

    notes = []
    jpath = out / JOURNAL
    if jpath.exists():
        try:
            journal = json.loads(jpath.read_text(encoding="utf-8"))
        except ValueError:  # killed while writing the journal: its swap had not begun
            jpath.unlink()
            journal = None
    else:
        journal = None
    if journal is not None:
        _roll_back(out, journal)
        jpath.unlink()
        _fsync_dir(out)
        notes.append(f"{out}: an earlier run was stopped during its swap; its outputs were "
                     "rolled back to the set before it")
    for p in out.iterdir():
        if p.name.startswith((f"{TMP_PREFIX}set.new.", f"{TMP_PREFIX}set.old.")) and p.is_dir() \
                and not p.is_symlink():
            shutil.rmtree(p, ignore_errors=True)
    return notes


def recover(out_dir) -> list[str]:
    """Roll back a swap that a kill interrupted in ``out_dir`` and remove abandoned staging
    folders (what every :func:`write_set` does first). Returns notes of what was done."""
    out = pathlib.Path(out_dir)
    if not out.is_dir():
        return []
    with _folder_lock(out):
        return _recover(out)


def _refuse_special(path: pathlib.Path) -> None:
    """An output never replaces a symbolic link, a device, a pipe or a socket."""
    if path.is_symlink():
        raise ValueError(f"{path}: is a symbolic link; outputs replace whole files, so remove "
                         "the link or choose another folder")
    if path.exists() and not path.is_file():
        raise ValueError(f"{path}: is not a regular file (a device, pipe or folder); "
                         "choose another name")


def write_set(out_dir, files: dict, known_names=(), inputs=(), known_patterns=()) \
        -> list[pathlib.Path]:
    """Write ``files`` ({name: str | bytes}) into ``out_dir`` as one complete set.

    Files named in ``known_names``, or matching a glob in ``known_patterns``, that the new set
    does not hold (outputs of an earlier run with other options) are removed in the same swap,
    so the folder never mixes two runs. Outputs whose names are files that the run reads
    (``inputs``) are refused before anything is written.

    Runs into one folder take turns (a lock on the folder). The new files are staged in a
    hidden folder inside ``out_dir`` (the same file system, even for a mount point); a journal
    written before the swap lets the next run roll back a swap that a kill interrupted.
    Returns the paths written.
    """
    import json

    out = pathlib.Path(out_dir)
    refuse_overwriting_inputs(out, list(files) + list(known_names), inputs)
    out = writable_folder(out)
    with _folder_lock(out):
        _recover(out)
        stale = {p.name for pat in known_patterns for p in out.glob(pat) if p.is_file()}
        aside_names = [n for n in dict.fromkeys([*files, *known_names, *sorted(stale)])]
        for name in aside_names:
            _refuse_special(out / name)
        try:
            stage = pathlib.Path(tempfile.mkdtemp(dir=out, prefix=f"{TMP_PREFIX}set.new."))
            old = pathlib.Path(tempfile.mkdtemp(dir=out, prefix=f"{TMP_PREFIX}set.old."))
        except OSError as exc:
            raise ValueError(_os_message(exc, out)) from None
        journal = {"stage": stage.name, "old": old.name, "new": list(files)}
        jpath = out / JOURNAL
        swapping = False
        try:
            for name, content in files.items():
                data = content.encode("utf-8") if isinstance(content, str) else bytes(content)
                target = out / name
                mode = stat.S_IMODE(target.stat().st_mode) if target.is_file() else \
                    _default_mode()
                _write_bytes(stage / name, data, mode)
            _fsync_dir(stage)
            _step("staged")
            with _signals_held():
                _write_bytes(jpath, json.dumps(journal).encode("utf-8"), _default_mode())
                _fsync_dir(out)
                swapping = True
                _step("journal")
                for name in aside_names:  # the old outputs aside …
                    if (out / name).is_file():
                        os.replace(out / name, old / name)
                        _step(f"aside {name}")
                for name in files:  # … and the new ones in
                    os.replace(stage / name, out / name)
                    _step(f"placed {name}")
                _fsync_dir(out)
                jpath.unlink()  # the commit point: from here on the new set stands
                swapping = False
                _fsync_dir(out)
                placed_sets.append(out)
                _step("committed")
                shutil.rmtree(stage, ignore_errors=True)
                shutil.rmtree(old, ignore_errors=True)
        except BaseException as exc:
            if swapping:
                _roll_back(out, journal)
                jpath.unlink(missing_ok=True)
                _fsync_dir(out)
            else:  # the swap had not begun (or was complete): no journal of ours may stay
                jpath.unlink(missing_ok=True)
            shutil.rmtree(stage, ignore_errors=True)
            shutil.rmtree(old, ignore_errors=True)
            if isinstance(exc, OSError):
                where = getattr(exc, "filename", None) or out
                raise ValueError(f"{out}: outputs not written, the previous ones are kept "
                                 f"({exc.strerror or exc} at {pathlib.Path(where).name})") \
                    from None
            raise
    return [out / name for name in files]
