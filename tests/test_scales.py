"""Answer scales (guessed from the usual scale ends, typed as LOW-HIGH, kept in the project)
and far-out answers (Tukey's fences and the usual scale of the other answers)."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

from lagwise.models.diary import TimeSettings
from lagwise.models.errors import DataError, ProjectError
from lagwise.models.outliers import far_values
from lagwise.models.project import Project, embed_table, open_project, save_project
from lagwise.models.recipe import DiaryRecipe
from lagwise.models.scales import guess_scale, parse_scale, scale_text

ORDER = TimeSettings(mode="order")


@pytest.mark.parametrize("answers, scale", [
    # the usual ends of rating scales (common practice), the smallest holding the answers
    ((1, 2, 4), (1, 5)), ((0, 3), (0, 4)), ((2, 6), (1, 7)), ((0, 5), (0, 6)),
    ((1, 9), (0, 10)), ((0, 10), (0, 10)), ((3.5, 80), (0, 100)),
    # no usual scale holds them: the lowest and highest answers
    ((-3, 3), (-3, 3)), ((0, 250), (0, 250)),
])
def test_guessed_scale_is_the_smallest_usual_scale(answers, scale):
    column = np.array([*answers, np.nan], dtype=float)
    assert guess_scale(column) == scale
    assert guess_scale(np.array([np.nan])) is None


def test_scales_are_written_and_read_as_low_high():
    assert parse_scale("1-7") == (1.0, 7.0)
    assert parse_scale(" 0 - 100 ") == (0.0, 100.0)
    assert parse_scale("-3-3") == (-3.0, 3.0)
    assert parse_scale("0.5-4.5") == (0.5, 4.5)
    assert scale_text((0.0, 100.0)) == "0-100" and parse_scale(scale_text((-3, 3))) == (-3, 3)
    for bad in ("7-1", "1-1", "1", "a-b", "1-7-9", ""):
        with pytest.raises(DataError):
            parse_scale(bad)


def test_recipe_uses_stated_scales_and_guesses_the_others():
    frame = pd.DataFrame({"calm": [2.0, 3.0, 5.0, 4.0], "tense": [10.0, 50.0, 90.0, 70.0]})
    recipe = DiaryRecipe.of(["calm", "tense"], ORDER, scales={"calm": (1.0, 9.0)})
    diary = recipe.diary(frame)
    assert recipe.item_scales(diary) == {"calm": (1.0, 9.0), "tense": (0.0, 100.0)}


def test_scales_are_kept_in_the_project_and_old_projects_open(tmp_path):
    frame = pd.DataFrame({"calm": [2.0, 3.0, 5.0, 4.0], "tense": [10.0, 50.0, 90.0, 70.0]})
    recipe = DiaryRecipe.of(["calm", "tense"], ORDER, scales={"calm": (1.0, 7.0)})
    path = tmp_path / "scales.lagwise"
    save_project(Project.of_recipe(embed_table(frame), recipe), path)
    assert json.loads(path.read_text(encoding="utf-8"))["scales"] == {"calm": [1.0, 7.0]}
    opened = open_project(path)
    assert opened.recipe.scales == (("calm", (1.0, 7.0)),)
    plain = tmp_path / "plain.lagwise"  # a project without scales has no "scales" field
    save_project(Project.of_recipe(embed_table(frame), DiaryRecipe.of(["calm", "tense"], ORDER)),
                 plain)
    assert "scales" not in json.loads(plain.read_text(encoding="utf-8"))
    assert open_project(plain).scales == ()
    doc = json.loads(path.read_text(encoding="utf-8"))
    doc["scales"] = {"calm": [7, 1]}
    path.write_text(json.dumps(doc), encoding="utf-8")
    with pytest.raises(ProjectError, match="scales.calm"):
        open_project(path)


def test_codes_beside_slider_answers_are_far_out():
    rng = np.random.default_rng(1)
    calm = rng.integers(0, 101, 250).astype(float)
    calm[[3, 50, 90]] = -99.0
    calm[7] = 999.0
    found = far_values(("calm",), calm[:, None])
    # -99 and 999 lie outside 0-100, the usual scale of the other answers; counted with numpy
    assert [(f.value, f.count) for f in found] == [(-99.0, int(np.sum(calm == -99))),
                                                   (999.0, int(np.sum(calm == 999)))]
    assert [f.code for f in found] == ["-99", "999"]


def test_rare_answers_at_the_scale_ends_are_not_far_out():
    rng = np.random.default_rng(2)
    calm = np.clip(rng.normal(50, 4, 250).round(), 35, 65)
    calm[:2] = [0.0, 100.0]              # beyond Tukey's fences, but the ends of 0-100
    q1, q3 = np.percentile(calm, [25, 75])
    assert calm[0] < q1 - 3 * (q3 - q1) and calm[1] > q3 + 3 * (q3 - q1)
    assert far_values(("calm",), calm[:, None]) == ()


def test_without_a_usual_scale_tukeys_outer_fences_decide():
    rng = np.random.default_rng(3)
    pulse = rng.normal(110, 8, 300)      # a measure on no rating scale (beyond 0-100)
    pulse[0] = -99.0
    q1, q3 = np.percentile(pulse, [25, 75])
    outside = (pulse < q1 - 3 * (q3 - q1)) | (pulse > q3 + 3 * (q3 - q1))  # Tukey's far out
    assert [f.value for f in far_values(("pulse",), pulse[:, None])] == sorted(pulse[outside])
