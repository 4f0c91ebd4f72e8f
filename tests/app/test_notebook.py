"""``bendline.fit`` for notebooks: the README's example runs, and it is the command line's pipeline."""

from __future__ import annotations

import os
import re

import pandas as pd
import pytest

import bendline
from bendline.inference.errors import InputError

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))


def test_the_readme_example_runs(monkeypatch, capsys):
    with open(os.path.join(ROOT, "README.md"), encoding="utf-8") as fh:
        text = fh.read()
    block = re.search(r"\*\*In a notebook\.\*\*.*?```python\n(.*?)```", text, re.S).group(1)
    assert len(block.strip().splitlines()) == 5
    monkeypatch.chdir(ROOT)
    scope = {}
    exec(compile(block, "README.md", "exec"), scope)
    fit = scope["fit"]
    assert isinstance(fit.segments, pd.DataFrame) and len(fit.segments) == 3
    assert list(fit.band.columns)[:2] == ["date", "trend_q05"] and len(fit.projection) == 14
    assert fit.json["spec"] == {"segments": 3, "seed": 1}
    assert "Reportable:" in capsys.readouterr().out


def test_a_data_frame_and_the_file_give_the_same_result():
    path = os.path.join(ROOT, "sample_series", "weekly_cases.csv")
    a = bendline.fit(path, segments=2, seed=4, draws=100)
    b = bendline.fit(pd.read_csv(path), segments=2, seed=4, draws=100)
    assert a.json["segments"] == b.json["segments"] and a.json["summary_text"] == b.json["summary_text"]
    assert "per week" in a.summary_text


def test_bad_options_name_the_option():
    with pytest.raises(InputError) as e:
        bendline.fit(os.path.join(ROOT, "sample_series", "weekly_cases.csv"), segments="many")
    assert e.value.column == "segments"
