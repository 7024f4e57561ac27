"""The command line, run as a user would: from a folder outside the project."""

import json
import subprocess
import sys
from pathlib import Path

import pandas as pd
import pytest

BIN = Path(sys.executable).parent
FAST = ["data.samples_per_class=30", "data.nodes=24", "train.epochs=3"]


def run(command: str, *arguments: str, cwd: Path) -> subprocess.CompletedProcess:
    return subprocess.run(
        [str(BIN / command), *arguments], cwd=cwd, capture_output=True, text=True, timeout=300
    )


def records_under(folder: Path) -> list[dict]:
    return [json.loads(path.read_text()) for path in sorted(folder.rglob("result.json"))]


@pytest.mark.parametrize(
    ("arguments", "family", "order"),
    [
        ([], "graph_conv", 3),
        (["arch=fc"], "fc", None),
        (["arch=line_conv", "arch.order=4", "seed=2"], "line_conv", 4),
        (["arch=graph_conv", "graph=line", "arch.order=2", "train.epochs=5"], "graph_conv", 2),
    ],
)
def test_single_jobs_run_from_any_folder_and_write_a_record(tmp_path, arguments, family, order):
    result = run("shiftbench", *FAST, *arguments, cwd=tmp_path)
    assert result.returncode == 0, result.stderr
    (record,) = records_under(tmp_path / "results")
    assert (record["status"], record["family"], record["order"]) == ("completed", family, order)
    assert f"{family} on graph" in result.stdout.splitlines()[-1]


def test_a_sweep_writes_one_record_per_job_and_the_report_tabulates_them(tmp_path):
    result = run("shiftbench", "-m", "arch=fc,line_conv,graph_conv", "seed=0,1,2", *FAST, cwd=tmp_path)
    assert result.returncode == 0, result.stderr
    records = records_under(tmp_path / "results" / "multirun")
    assert len(records) == 9 and all(r["status"] == "completed" for r in records)

    report = run("shiftbench-report", "results/multirun", "--out", "tables", cwd=tmp_path)
    assert report.returncode == 0, report.stderr
    table = pd.read_csv(tmp_path / "tables" / "summary.csv")
    assert sorted(table["family"]) == ["fc", "graph_conv", "line_conv"]
    assert list(table["seeds"]) == [3, 3, 3]


def test_the_families_study_runs_its_four_setups_over_three_seeds(tmp_path):
    result = run("shiftbench", "-m", "+experiment=families", *FAST, cwd=tmp_path)
    assert result.returncode == 0, result.stderr
    records = records_under(tmp_path / "results" / "families")
    setups = {(r["family"], r["graph"]) for r in records}
    assert len(records) == 12
    assert setups == {("fc", "none"), ("line_conv", "line"), ("graph_conv", "native"), ("graph_conv", "line")}


@pytest.mark.parametrize(
    "arguments", [["arch=cnn"], ["train.lr=0"], ["+arch.extra=1"], ["-m", "arch.order=2,-1"], ["arch.order=x"]]
)
def test_a_bad_config_prints_one_line_exits_2_and_writes_nothing(tmp_path, arguments):
    result = run("shiftbench", *arguments, cwd=tmp_path)
    assert result.returncode == 2
    assert result.stderr.count("\n") == 1 and "Traceback" not in result.stderr
    assert result.stderr.startswith("shiftbench: error: ")
    assert not (tmp_path / "results").exists()


def test_report_on_a_folder_without_records_is_a_one_line_error(tmp_path):
    result = run("shiftbench-report", str(tmp_path), cwd=tmp_path)
    assert result.returncode == 2
    assert result.stderr.strip() == f"shiftbench-report: error: no records (result.json) found under {tmp_path}"
