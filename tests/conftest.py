"""Shared test helpers: small diary tables built from a seeded random generator."""

from __future__ import annotations

import sys

import numpy as np
import pandas as pd
import pytest

from lagwise.models.diary import TimeSettings

GRID = TimeSettings(mode="grid", day="day", prompt="prompt")


def make_grid_table(days: int = 3, prompts: int = 5, items=("calm", "tense", "tired"),
                    drop=(), seed: int = 0) -> pd.DataFrame:
    """A day x prompt table with integer answers 1..7; `drop` lists (day, prompt) rows to leave out.

    Days and prompts are numbered from 1. The answers are random draws, never check values.
    """
    rng = np.random.default_rng(seed)
    rows = [(d, b) for d in range(1, days + 1) for b in range(1, prompts + 1)
            if (d, b) not in set(drop)]
    table = pd.DataFrame(rows, columns=["day", "prompt"])
    for name in items:
        table[name] = rng.integers(1, 8, size=len(rows)).astype(float)
    return table


@pytest.fixture(autouse=True)
def _collect_garbage_between_tests():
    """Once a window test has made the application, garbage cycles are collected on a timer
    in the window's thread only (desktop.app); tests that do not run its event loop get the
    same generational collection after each test."""
    yield
    app = sys.modules.get("lagwise.desktop.app")
    if app is not None:
        app.collect_garbage()


@pytest.fixture
def grid_table():
    """The `make_grid_table` factory."""
    return make_grid_table


@pytest.fixture
def grid_settings() -> TimeSettings:
    """Grid time settings for tables with columns 'day' and 'prompt'."""
    return GRID
