"""Starting the window: `lagwise` (run_gui) and `lagwise demo` (run_demo).

The QApplication is made once, high-DPI safe (fractional scale factors are passed through),
with the Lagwise look. `lagwise demo --screenshot FILE` loads the bundled demo, estimates
it and renders the window offscreen to a PNG without needing a display; `--save-data FILE`
writes the demo diary to a file for the command line. `lagwise FILE` opens
a project (.lagwise) or imports a data file; at start-up the window offers to restore work
autosaved before a crash. On Linux without a display, opening the window is refused with a
hint instead of Qt aborting.

Python's cycle collector runs in whichever thread happens to allocate: in an estimate's worker
thread it could destroy Qt objects the window's thread owns (a crash, or a hang). The
application therefore collects on a timer in the window's thread instead (pyqtgraph's
GarbageCollector: automatic collection off, the same generations collected every
GC_INTERVAL seconds once their counts pass the usual thresholds).
"""

from __future__ import annotations

import argparse
import json
import os
import sys
from pathlib import Path

from lagwise.models.errors import LagwiseError, ProjectError
from lagwise.resources import demo_diary_path

# the demo ships inside the package (lagwise.resources), so installed copies find it too
DEMO_DIARY = demo_diary_path()
DEMO_FOLDER = DEMO_DIARY.parent
DEMO_TRUTH = DEMO_FOLDER / "demo_truth.json"
SCREENSHOT_SIZE = (1440, 900)
GC_INTERVAL = 0.25      # seconds between the window thread's garbage collections
_collector = None       # the one GarbageCollector (made with the application)
NO_DISPLAY = ("no display is available to open the window (DISPLAY and WAYLAND_DISPLAY are "
              "not set); try 'lagwise demo --screenshot demo.png' to render the demo to a "
              "picture instead")


def has_display() -> bool:
    """False on Linux/BSD with no X11 or Wayland display and no Qt platform chosen."""
    if not sys.platform.startswith(("linux", "freebsd", "openbsd", "netbsd")):
        return True
    return any(os.environ.get(name) for name in ("DISPLAY", "WAYLAND_DISPLAY", "QT_QPA_PLATFORM"))


def make_app(argv: list[str] | None = None):
    """The QApplication (made once), with names for QSettings, the Lagwise style and garbage
    collection in the window's thread only."""
    from PySide6.QtCore import Qt
    from PySide6.QtGui import QGuiApplication
    from PySide6.QtWidgets import QApplication

    from lagwise.desktop import style

    app = QApplication.instance()
    if app is None:
        QGuiApplication.setHighDpiScaleFactorRoundingPolicy(
            Qt.HighDpiScaleFactorRoundingPolicy.PassThrough)
        app = QApplication([sys.argv[0] if sys.argv else "lagwise", *(argv or [])])
    app.setOrganizationName("Lagwise")
    app.setApplicationName("Lagwise")
    style.apply_style(app)
    global _collector
    if _collector is None:         # cycles are collected in this thread only (module docstring)
        from pyqtgraph.util.garbage_collector import GarbageCollector

        _collector = GarbageCollector(interval=GC_INTERVAL)
    return app


def collect_garbage() -> None:
    """The collector's timed check, run now (for code that does not spin the event loop);
    nothing when automatic collection was never switched off."""
    if _collector is not None:
        _collector.check()


def load_demo(session) -> None:
    """Put the demo diary and its model (resources/demo) into `session`."""
    from lagwise.desktop.session import ImportSettings
    from lagwise.models.diary import TimeSettings
    from lagwise.models.readers import read_table
    from lagwise.models.spec import ModelSpec

    if not DEMO_DIARY.exists() or not DEMO_TRUTH.exists():
        raise ProjectError(f"the demo files are missing from {DEMO_FOLDER}")
    frame = read_table(DEMO_DIARY)
    time = TimeSettings(mode="grid", day="day", prompt="prompt")
    items = tuple(str(c) for c in frame.columns if c not in time.columns())
    settings = ImportSettings(path=str(DEMO_DIARY), items=items, time=time)
    diary = settings.recipe.diary(frame, source=str(DEMO_DIARY))
    try:
        truth = json.loads(DEMO_TRUTH.read_text(encoding="utf-8"))
    except (OSError, ValueError) as exc:
        raise ProjectError(f"{DEMO_TRUTH}: cannot read the demo model ({exc})") from None
    spec = ModelSpec.from_json(truth["spec"])
    session.load_data(frame, diary, settings, spec=spec)
    session.set_untitled_name("demo")
    session.mark_saved(None)  # the bundled demo as shipped: nothing to save yet


def add_demo_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--screenshot", metavar="FILE",
                        help="estimate the demo and save a picture of the window to FILE (PNG) "
                             "without opening it")
    parser.add_argument("--save-data", metavar="FILE",
                        help="write the demo diary (CSV, invented) to FILE, e.g. to try "
                             "'lagwise fit' on it, and stop")


def run_demo(args: argparse.Namespace) -> int:
    """Open the demo in the window, or with --screenshot render it to a PNG, or with
    --save-data write its diary to a file; 0 when done."""
    save_data = getattr(args, "save_data", None)
    if save_data:
        from lagwise.models.atomic import write_output

        write_output(save_data, DEMO_DIARY.read_bytes(), "the demo diary")
        print(f"The demo diary (invented, simulated) was written to {save_data}")
        return 0
    screenshot = getattr(args, "screenshot", None)
    if screenshot:
        from PySide6.QtWidgets import QApplication

        if QApplication.instance() is None:
            os.environ["QT_QPA_PLATFORM"] = "offscreen"
        return _demo_screenshot(Path(screenshot))
    if not has_display():
        print(f"lagwise: {NO_DISPLAY}", file=sys.stderr)
        return 2
    app = make_app()
    from lagwise.desktop.mainwindow import MainWindow

    window = MainWindow()
    load_demo(window.session)
    window.show()
    window.estimate()
    return int(app.exec())


def run_gui(argv: list[str] | None = None) -> int:
    """Open the window; a project file given on the command line is opened, a data file goes
    to the import dialog."""
    parser = argparse.ArgumentParser(prog="lagwise", description="Open the Lagwise window.")
    parser.add_argument("file", nargs="?", help="a project (.lagwise) to open or a diary file "
                                                "to import")
    args = parser.parse_args(list(argv or []))
    if args.file is not None and not Path(args.file).exists():
        raise LagwiseError(f"{args.file}: no such file")
    if not has_display():
        print(f"lagwise: {NO_DISPLAY}", file=sys.stderr)
        return 2
    app = make_app()
    start_window(args.file)
    return int(app.exec())


def start_window(file: str | Path | None = None):
    """Show a new main window, offer to restore work autosaved before a crash, then open the
    project (.lagwise) or import the data `file` if one is given. Returns the window."""
    from lagwise.desktop.mainwindow import MainWindow
    from lagwise.models.project import is_project_file

    window = MainWindow()
    window.show()
    if window.files.offer_recovery():
        if file is not None:
            window.statusBar().showMessage(f"Restored the autosaved work; {Path(file).name} "
                                           "was not opened.", 15000)
    elif file is not None and is_project_file(file):
        window.files.open(file)
    elif file is not None:
        window.import_data(file)
    return window


def _demo_screenshot(path: Path) -> int:
    app = make_app()
    from lagwise.desktop.export import save_widget_png
    from lagwise.desktop.mainwindow import PAGES, MainWindow
    from lagwise.models.estimate import fit

    window = MainWindow()
    load_demo(window.session)
    snapshot = window.session.snapshot()
    result = fit(snapshot.diary, snapshot.spec, snapshot.options)
    window.session.set_result(result, snapshot)
    window.resize(*SCREENSHOT_SIZE)
    window.show_page(PAGES.index("Results"))
    window.results.tabs.setCurrentWidget(window.results.dynamics)
    window.show()
    for _ in range(3):
        app.processEvents()
    save_widget_png(window, path, scale=1.0)
    window.hide()  # not close(): a screenshot must not change the remembered window layout
    print(f"saved {path} ({SCREENSHOT_SIZE[0]} x {SCREENSHOT_SIZE[1]})")
    return 0
