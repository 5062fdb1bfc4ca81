"""The writer that keeps users' files: kills at every step of a swap, writers that share a
folder, links and special files, and what the messages say is on disk.

No physics and no outside source: the expectations are the promises of the README's safety
section. Kills are real (a forked child leaves with os._exit at a named step of the writer);
interleavings are forced by pausing one writer at each step while another runs.
"""

import hashlib
import multiprocessing as mp
import os
import pathlib
import threading

import pytest

from mwreach.coverage import safefiles
from mwreach.coverage.safefiles import JOURNAL, TMP_PREFIX, atomic_write, recover, write_set

OLD = {"summary.json": "old summary\n", "radials.csv": "old radials\n", "night.json": "old\n"}
NEW = {"summary.json": "new summary\n", "radials.csv": "new radials\n",
       "contours.kml": "new kml\n"}
KNOWN = ("summary.json", "radials.csv", "contours.kml", "night.json")
STEPS = (["staged", "journal"] + [f"aside {n}" for n in ("summary.json", "radials.csv",
                                                           "night.json")]
         + [f"placed {n}" for n in NEW] + ["committed"])


def digest(folder: pathlib.Path) -> dict:
    return {p.name: hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(folder.iterdir()) if p.is_file()}


def set_digest(files: dict) -> dict:
    return {n: hashlib.sha256(t.encode()).hexdigest() for n, t in sorted(files.items())}


def _die_at(out, label):
    def step(name):
        if name == label:
            os._exit(9)  # a kill: no rollback, no finally, nothing flushed by Python

    safefiles._step = step
    write_set(out, NEW, known_names=KNOWN)
    os._exit(0)


@pytest.mark.parametrize("label", STEPS)
def test_a_kill_at_any_step_of_the_swap_never_loses_the_complete_set(tmp_path, label):
    out = tmp_path / "out"
    write_set(out, OLD, known_names=KNOWN)
    child = mp.get_context("fork").Process(target=_die_at, args=(out, label))
    child.start()
    child.join(60)
    assert child.exitcode == 9
    notes = recover(out)  # what the next run does first
    hidden = [p.name for p in out.iterdir() if p.name.startswith(".")]
    assert hidden == []  # no journal, no staging folder left
    if label == "committed":
        assert digest(out) == set_digest(NEW) and notes == []
    else:
        assert digest(out) == set_digest(OLD)  # rolled back to the old set, whole
        assert bool(notes) == (label != "staged")  # a swap that had begun is said
    write_set(out, NEW, known_names=KNOWN)  # and the next run goes through
    assert digest(out) == set_digest(NEW)


def test_a_kill_during_the_rollback_is_rolled_back_again(tmp_path, monkeypatch):
    out = tmp_path / "out"
    write_set(out, OLD, known_names=KNOWN)

    def child_run():
        real = os.replace
        count = {"n": 0}

        def step(name):
            if name == f"placed {list(NEW)[1]}":
                raise OSError(5, "Input/output error")  # the swap fails: rollback starts …

        def replace(src, dst):
            if ".old." in str(src):  # … and the process is killed half-way through it
                count["n"] += 1
                if count["n"] == 2:
                    os._exit(9)
            real(src, dst)

        safefiles._step = step
        safefiles.os.replace = replace
        write_set(out, NEW, known_names=KNOWN)

    child = mp.get_context("fork").Process(target=child_run)
    child.start()
    child.join(60)
    assert child.exitcode == 9
    assert (out / JOURNAL).exists()
    recover(out)
    assert digest(out) == set_digest(OLD)


def test_two_writers_into_one_folder_take_turns(tmp_path, monkeypatch):
    # writer A is paused at each step in turn while writer B writes into the same folder: B
    # waits for A, and the folder always ends with B's whole set, never a mix or a hole
    out = tmp_path / "out"
    b_files = {"summary.json": "B summary\n", "radials.csv": "B radials\n"}
    for label in STEPS:
        write_set(out, OLD, known_names=KNOWN)
        paused, resume = threading.Event(), threading.Event()

        def step(name, label=label):
            if name == label and threading.current_thread().name == "A":
                paused.set()
                resume.wait(30)

        monkeypatch.setattr(safefiles, "_step", step)
        errors = []

        def writer(files):
            try:
                write_set(out, files, known_names=KNOWN)
            except BaseException as exc:  # noqa: BLE001 - reported below
                errors.append(exc)

        a = threading.Thread(target=writer, args=(NEW,), name="A")
        a.start()
        assert paused.wait(30)
        b = threading.Thread(target=writer, args=(b_files,), name="B")
        b.start()
        b.join(0.3)
        assert b.is_alive()  # B waits for A's lock
        resume.set()
        a.join(30)
        b.join(30)
        assert errors == []
        assert digest(out) == set_digest(b_files), label
        assert [p.name for p in out.iterdir() if p.name.startswith(".")] == []


def test_a_run_leaves_other_folders_staging_alone(tmp_path):
    results, v2 = tmp_path / "results", tmp_path / "results.v2"
    v2.mkdir()
    theirs = v2 / f"{TMP_PREFIX}set.new.abc"
    theirs.mkdir()
    (theirs / "summary.json").write_text("being written by another run")
    write_set(results, NEW, known_names=KNOWN)
    assert (theirs / "summary.json").exists()
    beside = tmp_path / f"{TMP_PREFIX}results.new.xyz"  # an older version's staging folder
    beside.mkdir()
    write_set(results, NEW, known_names=KNOWN)
    assert beside.exists()


def test_plots_of_an_earlier_set_go_with_it(tmp_path):
    out = tmp_path / "fit"
    write_set(out, {"fit.json": "1", "fit_north.png": "n", "fit_east.png": "e"},
              known_patterns=("fit_*.png",))
    write_set(out, {"fit.json": "2", "fit_south.png": "s"}, known_patterns=("fit_*.png",))
    assert sorted(p.name for p in out.iterdir()) == ["fit.json", "fit_south.png"]


def test_links_and_special_files_are_never_replaced(tmp_path):
    out = tmp_path / "out"
    write_set(out, OLD, known_names=KNOWN)
    elsewhere = tmp_path / "elsewhere.txt"
    elsewhere.write_text("keep")
    (out / "contours.kml").symlink_to(elsewhere)
    with pytest.raises(ValueError, match="contours.kml: is a symbolic link"):
        write_set(out, NEW, known_names=KNOWN)
    assert (out / "contours.kml").is_symlink() and elsewhere.read_text() == "keep"
    (out / "contours.kml").unlink()
    os.mkfifo(out / "contours.kml")
    with pytest.raises(ValueError, match="is not a regular file"):
        write_set(out, NEW, known_names=KNOWN)
    assert (out / "contours.kml").is_fifo()
    assert [p.name for p in out.iterdir() if p.name.startswith(".")] == []
    # one file: written through a link to its target; a device or pipe is refused
    link = tmp_path / "sheet.pdf"
    link.symlink_to(elsewhere)
    atomic_write(link, "through the link")
    assert link.is_symlink() and elsewhere.read_text() == "through the link"
    with pytest.raises(ValueError, match="is not a regular file"):
        atomic_write(out / "contours.kml", "x")
    if os.path.exists("/dev/full"):
        with pytest.raises(ValueError, match="/dev/full: is not a regular file"):
            atomic_write("/dev/full", "x")
        assert pathlib.Path("/dev/full").is_char_device()


def test_interrupt_after_the_swap_says_the_new_set_is_in_place(demo_copy, monkeypatch):
    # Ctrl-C held back during the swap arrives just after it: the message must say what is
    # on disk (the new set), not "nothing was replaced"
    import contextlib
    import io
    import signal

    from mwreach.coverage import cli

    def step(name):
        if name == "journal":
            os.kill(os.getpid(), signal.SIGINT)  # delivered once the swap is complete

    monkeypatch.setattr(safefiles, "_step", step)
    # Python's own Ctrl-C handler, as in a real command (a Qt test may have set another)
    previous = signal.signal(signal.SIGINT, signal.default_int_handler)
    demo = pathlib.Path(__file__).parents[1] / "data" / "demo" / "quellmoor.toml"
    text = demo.read_text(encoding="utf-8")
    text = text[: text.index("[night]")].replace("bearing_step_deg = 1.0",
                                                 "bearing_step_deg = 30.0")
    study = demo_copy / "s.toml"
    study.write_text(text.replace("step_km = 0.25", "step_km = 2\nmax_km = 40"))
    err = io.StringIO()
    try:
        with contextlib.redirect_stderr(err), contextlib.redirect_stdout(io.StringIO()):
            rc = cli.main(["run", str(study), "-o", str(demo_copy / "out")])
    finally:
        signal.signal(signal.SIGINT, previous)
    assert rc == 130
    assert "the new outputs are complete in" in err.getvalue(), err.getvalue()
    assert (demo_copy / "out" / "summary.json").exists()


def test_staging_is_inside_the_output_folder(tmp_path, monkeypatch):
    # staged on the output folder's own file system, so a mount point as --out never needs a
    # rename across devices; nothing is created beside the folder
    out = tmp_path / "mnt"
    out.mkdir()
    seen = {}

    def step(name):
        if name == "staged":
            seen["inside"] = sorted(p.name.rsplit(".", 1)[0] for p in out.iterdir()
                                    if p.name.startswith(TMP_PREFIX))
            seen["beside"] = sorted(p.name for p in tmp_path.iterdir() if p != out)

    monkeypatch.setattr(safefiles, "_step", step)
    write_set(out, NEW, known_names=KNOWN)
    assert seen == {"inside": [f"{TMP_PREFIX}set.new", f"{TMP_PREFIX}set.old"], "beside": []}
    assert os.stat(out).st_dev == os.stat(out / "summary.json").st_dev


def test_a_failing_writer_says_what_the_folder_holds(tmp_path, monkeypatch):
    # A writes its set; B fails on a full disk: B says the previous set (A's) is kept, and the
    # folder holds A's whole set
    import errno

    out = tmp_path / "out"
    write_set(out, NEW, known_names=KNOWN)
    real = safefiles._write_bytes

    def full(path, data, mode):
        if ".new." in str(path) and path.name == "radials.csv":
            raise OSError(errno.ENOSPC, "No space left on device", str(path))
        real(path, data, mode)

    monkeypatch.setattr(safefiles, "_write_bytes", full)
    with pytest.raises(ValueError, match="outputs not written, the previous ones are kept"):
        write_set(out, {"summary.json": "B\n", "radials.csv": "B\n"}, known_names=KNOWN)
    assert digest(out) == set_digest(NEW)


@pytest.mark.parametrize("k", [0, 1, 2])
def test_a_swap_that_fails_after_some_files_are_placed_puts_the_old_ones_back(tmp_path, k,
                                                                            monkeypatch):
    # no kill this time: the writer itself fails just after placing file k of the new set; the
    # rollback must take back every file already placed, so the folder holds the old set whole
    out = tmp_path / "out"
    write_set(out, OLD, known_names=KNOWN)
    names = list(NEW)

    def step(name):
        if name == f"placed {names[k]}":
            raise OSError(5, "Input/output error")

    monkeypatch.setattr(safefiles, "_step", step)
    with pytest.raises((OSError, ValueError)):
        write_set(out, NEW, known_names=KNOWN)
    assert digest(out) == set_digest(OLD)
    assert [p.name for p in out.iterdir() if p.name.startswith(".")] == []
