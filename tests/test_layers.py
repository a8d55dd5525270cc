"""The computation layer stays free of Qt and of the desktop package."""

from __future__ import annotations

import json
import re
import shutil
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
QT_OR_DESKTOP = ("PySide6", "shiboken6", "pyqtgraph", "lagwise.desktop")


def test_import_linter_contract_holds():
    # The contract in pyproject.toml: models/ never imports desktop/, PySide6 or pyqtgraph.
    command = shutil.which("lint-imports", path=str(Path(sys.executable).parent))
    assert command is not None, "import-linter is not installed beside this Python"
    done = subprocess.run([command], cwd=ROOT, capture_output=True, text=True, timeout=300)
    assert done.returncode == 0, done.stdout + done.stderr
    assert "0 broken" in done.stdout
    # and the engine has no import cycle (the acyclic contract, also in pyproject.toml)
    assert "no import cycle" in done.stdout and "KEPT" in done.stdout


def test_importing_every_models_module_loads_no_qt():
    script = (
        "import importlib, json, pkgutil, sys\n"
        "import lagwise.models as models\n"
        "names = sorted(m.name for m in pkgutil.walk_packages(models.__path__))\n"
        "for name in names:\n"
        "    importlib.import_module('lagwise.models.' + name)\n"
        f"bad = sorted(m for m in sys.modules if m.startswith({QT_OR_DESKTOP!r}))\n"
        "print(json.dumps({'modules': names, 'loaded': bad}))\n"
    )
    done = subprocess.run([sys.executable, "-c", script], cwd=ROOT, capture_output=True,
                          text=True, timeout=300)
    assert done.returncode == 0, done.stderr
    report = json.loads(done.stdout.strip().splitlines()[-1])
    assert {"diary", "readers", "timegrid", "windows", "summary"} <= set(report["modules"])
    assert report["loaded"] == []


BARE_IMPORT = re.compile(r"^\s*(from|import)\s+(models|desktop|resources)\b", re.MULTILINE)


def test_code_imports_the_installed_package_names_only():
    # The folders install as lagwise.models / lagwise.desktop / lagwise.resources; a bare
    # `import models` would load a second copy of a module (or a user's own models.py).
    offenders = []
    for folder in ("models", "desktop", "resources", "tests"):
        for path in sorted((ROOT / folder).rglob("*.py")):
            for match in BARE_IMPORT.finditer(path.read_text(encoding="utf-8")):
                line = path.read_text(encoding="utf-8")[:match.start()].count("\n") + 1
                offenders.append(f"{path.relative_to(ROOT)}:{line}: {match.group(0).strip()}")
    assert offenders == []


MAX_MODULE_LINES = 600


def test_no_engine_module_is_longer_than_a_reader_can_hold():
    long = {str(path.relative_to(ROOT)): n for path in sorted((ROOT / "models").rglob("*.py"))
            if (n := len(path.read_text(encoding="utf-8").splitlines())) > MAX_MODULE_LINES}
    assert long == {}
