"""Bundled files: the invented demo diary (demo/), the project-format description and the
built-in guide (guide.html).

Installed as `lagwise.resources`; code finds the files with
``importlib.resources.files("lagwise.resources")``, so they work from a wheel too.
"""

from __future__ import annotations

from importlib.resources import files
from pathlib import Path


def demo_diary_path() -> Path:
    """Where the installed demo diary (demo/demo_diary.csv) is, from any working folder."""
    return Path(str(files(__name__).joinpath("demo", "demo_diary.csv")))


def guide_html() -> str:
    """The built-in guide (guide.html): plain HTML with a named anchor per section."""
    return files(__name__).joinpath("guide.html").read_text(encoding="utf-8")
