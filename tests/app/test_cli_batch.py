"""``bendline batch``: one result per region, summary.csv, failures reported, exit codes."""

from __future__ import annotations

import csv
import json
import os
import re
import sys

import numpy as np
import pytest

from bendline.app import cli, commands
from bendline.app.commands import batch
from bendline.app.executors import InlineExecutor
from bendline.app.runs import RunService
from bendline.app.store.disk import DiskRunStore
from bendline.inference.simulate import simulate

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
LONG = os.path.join(ROOT, "sample_series", "regions_long.csv")
FAST = ["--segments", "2", "--chains", "4", "--draws", "100", "--seed", "3"]
TOP_KEYS = {"schema_version", "series", "spec", "seed", "diagnostics", "changepoints", "segments",
            "current", "band", "projection", "data_quality"}
FORMULA_REGION = "=cmd|'/c calc'!A1"


@pytest.fixture(autouse=True)
def with_batch(monkeypatch):
    """``bendline batch`` known to app.cli.main, whether or not the lead has wired it yet."""
    original = commands.register_all

    def register_all(sub):
        original(sub)
        if "batch" not in sub.choices:
            batch.register(sub)

    monkeypatch.setattr(commands, "register_all", register_all)


def _summary(out_dir):
    with open(os.path.join(out_dir, "summary.csv"), encoding="utf-8-sig", newline="") as fh:
        rows = list(csv.reader(fh))
    header, body = rows[0], rows[1:]
    return header, [dict(zip(header, row)) for row in body]


def _long_csv(path, regions):
    """Write a long-format file: {region: (start, counts or cells)}."""
    with open(path, "w", encoding="utf-8", newline="") as fh:
        w = csv.writer(fh)
        w.writerow(["date", "district", "cases"])
        for name, (start, cells) in regions.items():
            for i, cell in enumerate(cells):
                w.writerow([str(np.datetime64(start) + i), name, cell])


@pytest.fixture
def mixed_file(tmp_path):
    """Two fittable regions (one named like a formula), one too short, one with a bad cell."""
    def counts(seed):
        s, _ = simulate(np.random.default_rng(seed), "2026-01-05", 70, start_level=30.0,
                        knot_days=[35.0], growth_rate_per_day=[0.03, -0.02], dispersion=50.0)
        return [int(v) for v in s.values]

    broken = counts(3)
    broken[9] = "lots"
    path = tmp_path / "mixed.csv"
    _long_csv(path, {"Alpha": ("2026-01-05", counts(1)), FORMULA_REGION: ("2026-01-05", counts(2)),
                     "Tiny": ("2026-01-05", [4, 6, 5, 7, 9]), "Broken": ("2026-01-05", broken)})
    return str(path)


@pytest.mark.slow
def test_batch_fits_every_region_of_the_sample(tmp_path, capsys):
    out = tmp_path / "fits"
    code = cli.main(["batch", LONG, "--by", "district", *FAST, "--out-dir", str(out), "--workers", "2"])
    header, rows = _summary(out)
    assert tuple(header) == batch.SUMMARY_COLUMNS
    assert [r["region"] for r in rows] == ["Harrowmere", "Orlund", "Quillby", "Tamsey"]
    all_converged = all(r["converged"] == "true" for r in rows)
    assert code == (0 if all_converged else 3)
    assert sorted(os.listdir(out)) == ["harrowmere.json", "orlund.json", "quillby.json", "summary.csv",
                                       "tamsey.json"]
    for row in rows:
        result = json.loads((out / row["result_file"]).read_text())
        assert TOP_KEYS <= set(result)
        assert result["series"]["name"] == row["region"]
        rate = result["current"]["growth_rate_per_day"]
        assert float(row["growth_rate_per_day_median"]) == pytest.approx(rate["median"])
        assert float(row["growth_rate_per_day_q05"]) <= float(row["growth_rate_per_day_q95"])
        assert row["latest_change_date_median"] == result["changepoints"][-1]["median_date"]
        assert float(row["rhat_max"]) == pytest.approx(result["diagnostics"]["rhat_max"])
        # exactly one of doubling or halving time is given for a clear trend
        assert (row["doubling_time_days_median"] == "") != (row["halving_time_days_median"] == "")
    # Orlund and Quillby decline: their negative rates are numbers, not neutralised text
    orlund = next(r for r in rows if r["region"] == "Orlund")
    assert orlund["growth_rate_per_day_median"].startswith("-0.")
    assert float(orlund["growth_rate_per_day_median"]) < 0
    err = capsys.readouterr().err
    assert "4/4 regions done" in err and "Traceback" not in err


@pytest.mark.slow
def test_a_region_gives_the_same_result_as_bendline_fit(tmp_path):
    out = tmp_path / "fits"
    cli.main(["batch", LONG, "--by", "district", *FAST, "--out-dir", str(out), "--quiet", "--workers", "2"])
    single = tmp_path / "orlund.json"
    cli.main(["fit", LONG, "--region", "Orlund", *FAST, "--out", str(single), "--quiet"])
    from_batch = json.loads((out / "orlund.json").read_text())
    from_fit = json.loads(single.read_text())
    for key in ("spec", "spec_resolved", "changepoints", "current", "segments"):
        assert from_batch[key] == from_fit[key], key


@pytest.mark.slow
def test_failing_regions_are_reported_and_do_not_stop_the_others(tmp_path, mixed_file, capsys):
    out = tmp_path / "fits"
    code = cli.main(["batch", mixed_file, "--by", "district", *FAST, "--out-dir", str(out), "--workers", "2"])
    assert code == 3
    _, rows = _summary(out)
    by_region = {r["region"].lstrip("'"): r for r in rows}
    assert [r["region"] for r in rows] == ["Alpha", "'" + FORMULA_REGION, "Tiny", "Broken"]

    tiny = by_region["Tiny"]
    assert tiny["status"] == "failed" and tiny["result_file"] == "" and tiny["converged"] == ""
    assert "too few" in tiny["message"] and "segments" in tiny["message"]
    broken = by_region["Broken"]
    assert broken["status"] == "failed"
    bad_row = 1 + 70 + 70 + 5 + 10  # header, Alpha, the formula region, Tiny, then Broken's 10th row
    assert f"row {bad_row}" in broken["message"] and "lots" in broken["message"]

    for name in ("Alpha", FORMULA_REGION):
        row = by_region[name]
        assert row["status"] in ("converged", "unconverged") and row["converged"] in ("true", "false")
        result = json.loads((out / row["result_file"]).read_text())
        assert result["series"]["name"] == name
    # the formula-like name is neutralised in the CSV, and its file name is a plain slug
    assert by_region[FORMULA_REGION]["region"] == "'" + FORMULA_REGION
    assert by_region[FORMULA_REGION]["result_file"] == "cmd-c-calc-a1.json"
    assert sorted(os.listdir(out)) == ["alpha.json", "cmd-c-calc-a1.json", "summary.csv"]
    err = capsys.readouterr().err
    assert "4/4 regions done" in err and "could not be fitted" in err


def test_neutralise_touches_only_text_that_a_spreadsheet_would_run():
    assert batch.neutralise("Orlund") == "Orlund"
    assert batch.neutralise("2026-05-01") == "2026-05-01"
    for text in ("=1+1", "+1", "-1+2", "@SUM(A1)", "\t=1", "\r=1", " =1", "Alpha,=1"):
        assert batch.neutralise(text) == "'" + text
    assert batch.neutralise(-0.02) == -0.02 and batch.neutralise(3) == 3
    row = batch.summary_row("-north", {"status": "failed", "result": None, "message": "=oops"})
    cells = [batch._cell(row[c]) for c in batch.SUMMARY_COLUMNS]
    assert cells[0] == "'-north" and "'=oops" in cells


def test_region_slugs_are_safe_and_unique():
    taken = set()
    assert batch.region_slug("Zürich Nord", taken) == "zurich-nord"
    assert batch.region_slug("zurich nord", taken) == "zurich-nord-2"
    assert batch.region_slug("../../etc/passwd", taken) == "etc-passwd"
    assert batch.region_slug("東京", taken) == "region"
    assert batch.region_slug("CON", taken) == "con-region"


def test_a_change_date_applies_per_region_and_outside_a_region_it_fails_that_region(tmp_path, capsys):
    out = tmp_path / "fits"
    code = cli.main(["batch", LONG, "--by", "district", *FAST, "--change-date", "2031-01-01",
                     "--out-dir", str(out), "--quiet"])
    assert code == 3
    _, rows = _summary(out)
    assert len(rows) == 4 and all(r["status"] == "failed" for r in rows)
    assert all("outside the series" in r["message"] and r["region"] in r["message"] for r in rows)


@pytest.mark.parametrize("argv, words", [
    (["--by", "county"], ("county", "'district'")),
    (["--by", "district", "--completeness", "half"], ("completeness", "half")),
    (["--by", "district", "--segments", "40"], ("segments", "40")),
    (["--by", "district", "--workers", "0"], ("--workers",)),
])
def test_bad_input_exits_2_with_a_message(tmp_path, capsys, argv, words):
    code = cli.main(["batch", LONG, *argv, "--out-dir", str(tmp_path / "fits"), "--quiet"])
    err = capsys.readouterr().err
    assert code == 2
    for word in words:
        assert word in err
    assert "Traceback" not in err
    assert not (tmp_path / "fits" / "summary.csv").exists()


def test_a_missing_file_exits_2(tmp_path, capsys):
    code = cli.main(["batch", str(tmp_path / "nope.csv"), "--by", "district", "--quiet"])
    assert code == 2 and "not found" in capsys.readouterr().err


def test_without_the_team_extras_redis_mode_says_so_and_exits_1(tmp_path, capsys, monkeypatch):
    args = cli.build_parser().parse_args(["batch", LONG, "--by", "district", *FAST, "--redis",
                                          "redis://localhost:1/0", "--out-dir", str(tmp_path / "fits"),
                                          "--quiet"])
    # other subcommands may import the team modules while the parser is built; fail them only now
    monkeypatch.setitem(sys.modules, "bendline.app.store.redis_store", None)
    monkeypatch.setitem(sys.modules, "bendline.app.team.tasks", None)
    code = args.handler(args)
    assert code == 1
    assert "team mode is not available" in capsys.readouterr().err


@pytest.mark.slow
def test_redis_mode_creates_one_run_per_region_and_waits_for_them(tmp_path, monkeypatch, capsys):
    store = DiskRunStore(str(tmp_path / "team"))
    service = RunService(store, InlineExecutor(store, background=True))  # stands in for the workers
    monkeypatch.setattr(batch, "team_service", lambda url: service)
    s, _ = simulate(np.random.default_rng(1), "2026-01-05", 70, start_level=30.0, knot_days=[35.0],
                    growth_rate_per_day=[0.03, -0.02], dispersion=50.0)
    path = tmp_path / "two.csv"
    _long_csv(path, {"Alpha": ("2026-01-05", [int(v) for v in s.values]),
                     "Tiny": ("2026-01-05", [4, 6, 5, 7, 9])})
    out = tmp_path / "fits"
    code = cli.main(["batch", str(path), "--by", "district", *FAST, "--redis", "redis://team:6379/0",
                     "--out-dir", str(out)])
    assert code == 3  # Tiny cannot be fitted
    _, rows = _summary(out)
    alpha, tiny = rows
    assert tiny["status"] == "failed" and "too few" in tiny["message"]
    assert alpha["status"] in ("converged", "unconverged") and alpha["result_file"] == "alpha.json"
    runs = service.list()
    assert len(runs) == 1 and runs[0]["series_name"] == "Alpha" and runs[0]["status"] == alpha["status"]
    result = json.loads((out / "alpha.json").read_text())
    assert result["run_id"] == runs[0]["id"]
    assert "2/2 regions done" in capsys.readouterr().err


@pytest.mark.slow
def test_a_batch_recorded_as_a_board_is_the_boards_release(tmp_path, monkeypatch, capsys):
    """``--board``: the fits are the board's runs; ``--board ID`` adds the next release to that board."""
    from bendline.app.boards import BoardService, board_view

    store = DiskRunStore(str(tmp_path / "team"))
    service = RunService(store, InlineExecutor(store, background=True))  # stands in for the workers
    monkeypatch.setattr(batch, "team_service", lambda url: service)
    s, _ = simulate(np.random.default_rng(1), "2026-01-05", 70, start_level=30.0, knot_days=[35.0],
                    growth_rate_per_day=[0.03, -0.02], dispersion=50.0)
    path = tmp_path / "two.csv"
    _long_csv(path, {"Alpha": ("2026-01-05", [int(v) for v in s.values]),
                     "Tiny": ("2026-01-05", [4, 6, 5, 7, 9])})
    out = tmp_path / "fits"
    args = ["batch", str(path), "--by", "district", *FAST, "--redis", "redis://team:6379/0", "--out-dir", str(out)]
    assert cli.main(args + ["--board"]) == 3  # Tiny cannot be fitted
    err = capsys.readouterr().err
    board_id = re.search(r"board ([0-9a-f]{16})", err).group(1)
    assert f"/board/{board_id}" in err
    boards = BoardService(service)
    rows = {r["series"]: r for r in board_view(boards.get(board_id), service)["releases"][0]["rows"]}
    assert rows["Tiny"]["status"] == "refused" and "too few" in rows["Tiny"]["reason"]
    result = json.loads((out / "alpha.json").read_text())
    assert result["run_id"] == rows["Alpha"]["run_id"]
    assert cli.main(args + ["--board", board_id]) == 3
    assert len(boards.get(board_id)["releases"]) == 2
    assert cli.main(args + ["--board", "0123456789abcdef"]) == 2
    assert "no board" in capsys.readouterr().err
    assert cli.main(["batch", str(path), "--by", "district", "--board"]) == 2
    assert "--board needs --redis" in capsys.readouterr().err
