"""The command line's start-up and screening timings (`lagwise bench --commands-only`), run
with `pytest -m bench tests/benchmarks -s`. Times are reported, never asserted; what is
asserted is that each timed command did its work."""

from __future__ import annotations

import numpy as np
import pytest

from lagwise.models.bench import BenchReport, format_report, measure_commands
from lagwise.models.bench.cases import QUICK_INSPECT_CASE

pytestmark = pytest.mark.bench


def test_command_line_timings():
    result = measure_commands(QUICK_INSPECT_CASE, repeats=2)
    print("\n" + format_report(BenchReport(commands=result, repeats=2)))
    seconds = (result.help_seconds, result.inspect_demo_seconds, result.screen_demo_seconds,
               result.inspect_long_seconds, result.tests_seconds, result.peer_tests_seconds)
    assert all(np.isfinite(s) and s > 0 for s in seconds)
    # 20% of prompts missed on purpose: the answered share is binomial around 0.8
    share = result.long_answered / QUICK_INSPECT_CASE.occasions
    assert abs(share - 0.8) < 5 * np.sqrt(0.16 / QUICK_INSPECT_CASE.occasions)
