"""The computation layer stays free of Qt and of the desktop package."""

from __future__ import annotations

import json
import shutil
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
QT_OR_DESKTOP = ("PySide6", "shiboken6", "pyqtgraph", "desktop")


def test_import_linter_contract_holds():
    # The contract in pyproject.toml: models/ never imports desktop/, PySide6 or pyqtgraph.
    command = shutil.which("lint-imports", path=str(Path(sys.executable).parent))
    assert command is not None, "import-linter is not installed beside this Python"
    done = subprocess.run([command], cwd=ROOT, capture_output=True, text=True, timeout=300)
    assert done.returncode == 0, done.stdout + done.stderr
    assert "0 broken" in done.stdout


def test_importing_every_models_module_loads_no_qt():
    script = (
        "import importlib, json, pkgutil, sys, models\n"
        "names = sorted(m.name for m in pkgutil.iter_modules(models.__path__))\n"
        "for name in names:\n"
        "    importlib.import_module('models.' + name)\n"
        f"bad = sorted(m for m in sys.modules if m.split('.')[0] in {QT_OR_DESKTOP!r})\n"
        "print(json.dumps({'modules': names, 'loaded': bad}))\n"
    )
    done = subprocess.run([sys.executable, "-c", script], cwd=ROOT, capture_output=True,
                          text=True, timeout=300)
    assert done.returncode == 0, done.stderr
    report = json.loads(done.stdout.strip().splitlines()[-1])
    assert {"diary", "readers", "timegrid", "windows", "summary"} <= set(report["modules"])
    assert report["loaded"] == []
