"""Shared fixtures: the demo study, a writable copy of it, and one CLI run of it."""

import pathlib
import shutil

import pytest

DEMO = pathlib.Path(__file__).parents[1] / "data" / "demo" / "quellmoor.toml"


@pytest.fixture
def demo_copy(tmp_path):
    """The demo's data files copied into tmp_path (study files written there find them)."""
    for f in DEMO.parent.iterdir():
        if f.suffix in (".geojson", ".csv", ".toml") and f != DEMO:
            shutil.copy(f, tmp_path / f.name)
    return tmp_path


@pytest.fixture(scope="session")
def demo_run(tmp_path_factory):
    """(output folder, printed text) of one `mwreach run` of the demo."""
    import contextlib
    import io

    from mwreach.coverage import cli

    out = tmp_path_factory.mktemp("demo_run")
    buf = io.StringIO()
    with contextlib.redirect_stdout(buf):
        assert cli.main(["run", str(DEMO), "--out", str(out)]) == 0
    return out, buf.getvalue()

