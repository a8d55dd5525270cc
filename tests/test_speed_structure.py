"""Start-up of the command line: which libraries a command loads (sys.modules of a fresh
interpreter). Structural checks, not timings: `lagwise bench` reports the seconds."""

from __future__ import annotations

import json
import subprocess
import sys

from lagwise.resources import demo_diary_path

HEAVY = ("PySide6", "pyqtgraph", "semopy", "statsmodels", "arch", "joblib", "scipy.optimize",
         "scipy.stats")


def loaded_after(code: str) -> set[str]:
    """The HEAVY libraries in sys.modules after running `code` in a fresh interpreter."""
    probe = (f"import json, sys\n{code}\n"
             f"print(json.dumps([m for m in {list(HEAVY)!r} if m in sys.modules]))")
    done = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True,
                          check=True, timeout=120)
    return set(json.loads(done.stdout.strip().splitlines()[-1]))


def test_command_line_modules_load_no_heavy_library():
    code = ("import lagwise.desktop.cli, lagwise.desktop.cli_inspect, "
            "lagwise.desktop.cli_bench")
    assert loaded_after(code) == set()


def test_inspect_of_the_demo_loads_no_estimation_library():
    """Screening needs numpy, pandas (reading) and scipy.special, nothing of the estimator."""
    code = ("import contextlib, io\nfrom lagwise.desktop.cli import main\n"
            "with contextlib.redirect_stdout(io.StringIO()):\n"
            f"    assert main(['inspect', {str(demo_diary_path())!r}, '--day', 'day', "
            "'--prompt', 'prompt']) == 0")
    assert loaded_after(code) == set()
