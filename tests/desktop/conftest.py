"""Desktop tests run offscreen, with their own settings file and an artifact folder.

QT_QPA_PLATFORM=offscreen is set before Qt is imported, so the real window can be driven
without a display. QSettings are redirected to a temporary folder, so the tests neither read
nor overwrite the user's remembered window layout. Pictures rendered by the tests go to
test-artifacts/ at the repository root (kept out of git by .gitignore) for a person to look at.
"""

from __future__ import annotations

import os

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

from pathlib import Path  # noqa: E402

import pytest  # noqa: E402

ARTIFACTS = Path(__file__).resolve().parents[2] / "test-artifacts"


@pytest.fixture(scope="session", autouse=True)
def isolated_settings(tmp_path_factory):
    """Point QSettings at a fresh folder for the whole test session."""
    from PySide6.QtCore import QSettings

    folder = tmp_path_factory.mktemp("settings")
    QSettings.setDefaultFormat(QSettings.Format.IniFormat)
    QSettings.setPath(QSettings.Format.IniFormat, QSettings.Scope.UserScope, str(folder))
    return folder


@pytest.fixture(scope="session")
def lagwise_app(qapp):
    """The QApplication with Lagwise's names and look (desktop.app.make_app). At the end the
    clipboard is emptied: data a test copied ("Copy table") and left on the offscreen
    platform's clipboard crashes the interpreter's exit (seen with PySide6 6.x)."""
    from PySide6.QtGui import QGuiApplication

    from lagwise.desktop.app import make_app

    app = make_app()
    yield app
    QGuiApplication.clipboard().clear()


@pytest.fixture(scope="session")
def artifacts() -> Path:
    """test-artifacts/ at the repository root, created on first use."""
    ARTIFACTS.mkdir(parents=True, exist_ok=True)
    return ARTIFACTS


@pytest.fixture
def session(lagwise_app):
    """A session holding the bundled demo diary and its model."""
    from lagwise.desktop.app import load_demo
    from lagwise.desktop.session import Session

    s = Session()
    load_demo(s)
    return s


@pytest.fixture
def screening_threads(monkeypatch):
    """The threads that screen are recorded."""
    import threading

    import lagwise.desktop.pages.screening_view as screening_view

    threads = []
    original = screening_view.screen_diary

    def recorded(*args, **kwargs):
        threads.append(threading.current_thread())
        return original(*args, **kwargs)

    monkeypatch.setattr(screening_view, "screen_diary", recorded)
    return threads
