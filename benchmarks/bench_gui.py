"""GUI responsiveness, run by hand:  QT_QPA_PLATFORM=offscreen .venv/bin/python benchmarks/bench_gui.py

Targets (issue): from a site drag to updated coarse contours on screen < 150 ms; a full
refinement (361 bearings, night and interference) without freezing the window, reported as the
longest gap between ticks of a 5 ms timer on the GUI thread.
"""

from __future__ import annotations

import pathlib
import time

from PySide6.QtCore import QElapsedTimer, QEventLoop, QSettings, QTimer

from mwreach.gui.app import COARSE_BEARINGS, MainWindow
from mwreach.gui.qt import ensure_app

DEMO = pathlib.Path(__file__).parents[1] / "data" / "demo" / "quellmoor.toml"


def wait_full(app, win):
    loop = QEventLoop()
    win.computer.result.connect(lambda req, res: loop.quit() if req.bearings is None else None)
    loop.exec()


def main():
    app = ensure_app()
    settings = QSettings("/tmp/mwreach-bench.ini", QSettings.IniFormat)
    win = MainWindow(settings)
    win.resize(1400, 900)
    win.show()
    win.open_path(str(DEMO))
    wait_full(app, win)

    # coarse updates while dragging: submit → result → repaint, measured on the GUI thread
    times = []
    st = win.document.spec.station
    for k in range(10):
        spec = win.document.spec.with_site(st.lat, st.lon + 0.01 * (k + 1))
        loop = QEventLoop()
        t0 = time.perf_counter()

        def got(req, res, loop=loop):
            if req.bearings is not None:
                win.map.repaint()  # synchronous paint of the new contours
                loop.quit()

        win.computer.result.connect(got)
        win.computer.submit(spec, bearings=COARSE_BEARINGS, interference=False, label="coarse")
        loop.exec()
        times.append((time.perf_counter() - t0) * 1e3)
        win.computer.result.disconnect(got)
    times.sort()
    print(f"drag → coarse contours on screen ({COARSE_BEARINGS.size} bearings): median "
          f"{times[len(times) // 2]:.0f} ms, worst {times[-1]:.0f} ms")

    # full refinement: longest stall of the GUI event loop
    gaps = []
    clock = QElapsedTimer()
    clock.start()
    last = [clock.elapsed()]

    def tick():
        now = clock.elapsed()
        gaps.append(now - last[0])
        last[0] = now

    timer = QTimer()
    timer.timeout.connect(tick)
    timer.start(5)
    t0 = time.perf_counter()
    win.computer.submit(win.document.spec)
    wait_full(app, win)
    total = time.perf_counter() - t0
    settle = QEventLoop()
    QTimer.singleShot(300, settle.quit)  # let the result views fill in, still timing the loop
    settle.exec()
    timer.stop()
    print(f"full refinement {total:.2f} s; longest GUI stall {max(gaps)} ms "
          f"(timer interval 5 ms, {len(gaps)} ticks)")
    win.document.dirty = False
    win.close()


if __name__ == "__main__":
    main()
