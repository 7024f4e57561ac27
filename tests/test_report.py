"""The summary table: one row per (data, graph, family, order), figures over seeds."""

import numpy as np
import pandas as pd
import pytest

from shiftbench.records import SCHEMA_VERSION, write_record
from shiftbench.report import filter_records, format_markdown, format_terminal, summary_table, write_report


def record(family, graph, order, seed, accuracy, status="completed"):
    return {
        "schema_version": SCHEMA_VERSION, "status": status, "data": "sensor_regimes", "family": family,
        "graph": graph, "order": order, "seed": seed, "parameters": 100 if family == "fc" else 40,
        "test_accuracy": accuracy if status == "completed" else None, "train_seconds": 1.0 + seed,
    }


RECORDS = [
    record("fc", "none", None, 0, 0.70), record("fc", "none", None, 1, 0.80), record("fc", "none", None, 2, 0.75),
    record("graph_conv", "native", 3, 0, 0.90), record("graph_conv", "native", 3, 1, 0.94),
    record("graph_conv", "native", 3, 2, None, status="failed"),
]


def test_mean_and_sample_std_over_seeds_match_numpy():
    table = summary_table(pd.DataFrame(RECORDS)).set_index("family")
    assert table.loc["fc", "test_accuracy_mean"] == np.mean([0.70, 0.80, 0.75])
    assert table.loc["fc", "test_accuracy_std"] == np.std([0.70, 0.80, 0.75], ddof=1)
    assert table.loc["graph_conv", "test_accuracy_mean"] == np.mean([0.90, 0.94])


def test_the_95_percent_interval_matches_scipy_t_interval():
    # Source: scipy.stats.t.interval (Student's t distribution with n - 1 degrees of freedom).
    from scipy import stats

    sample = [0.70, 0.80, 0.75]
    table = summary_table(pd.DataFrame(RECORDS)).set_index("family")
    expected = stats.t.interval(0.95, df=2, loc=np.mean(sample), scale=stats.sem(sample))
    assert (table.loc["fc", "test_accuracy_ci95_low"], table.loc["fc", "test_accuracy_ci95_high"]) == pytest.approx(expected)
    assert table.loc["fc", "test_accuracy_ci95"] == pytest.approx((expected[1] - expected[0]) / 2)


def test_the_interval_needs_two_seeds():
    table = summary_table(pd.DataFrame(RECORDS[:1]))
    assert table["test_accuracy_ci95"].isna().all()


def test_failed_jobs_are_counted_not_averaged():
    table = summary_table(pd.DataFrame(RECORDS)).set_index("family")
    assert (table.loc["graph_conv", "seeds"], table.loc["graph_conv", "failed"]) == (2, 1)
    assert table.loc["graph_conv", "train_seconds_mean"] == np.mean([1.0, 2.0])


def test_report_writes_csv_and_markdown_with_one_row_per_setting(tmp_path):
    for number, entry in enumerate(RECORDS):
        write_record(tmp_path / str(number), entry)
    text = write_report([tmp_path], tmp_path)
    assert len(pd.read_csv(tmp_path / "summary.csv")) == 2
    markdown = (tmp_path / "summary.md").read_text()
    rows = [line for line in markdown.splitlines() if line.startswith("|")]
    assert len(rows) == 4 and rows[0].startswith("| graph | family")
    assert "All rows: `data=sensor_regimes`." in markdown
    assert "![accuracy vs parameters](accuracy_vs_parameters.png)" in markdown
    assert max(len(line) for line in text.splitlines()) <= 100


def test_every_markdown_line_has_as_many_cells_as_the_header():
    # The pipe-table shape of GitHub Flavored Markdown (spec 0.29, section 4.10, "Tables").
    lines = format_markdown(summary_table(pd.DataFrame(RECORDS)).drop(columns="paths")).splitlines()
    assert len(lines) == 4
    cells = [line.strip().strip("|").split("|") for line in lines]
    assert all(len(row) == len(cells[0]) for row in cells)
    assert all(cell.strip().strip(":").strip("-") == "" for cell in cells[1])


def test_terminal_and_markdown_show_missing_values_as_dashes():
    table = summary_table(pd.DataFrame(RECORDS[:1]))[["family", "order", "test_accuracy_ci95"]]
    assert "-" in format_terminal(table).splitlines()[2]
    assert "| - |" in format_markdown(table)


def test_filters_keep_matching_records_and_reject_unknown_columns():
    frame = pd.DataFrame(RECORDS)
    assert set(filter_records(frame, ["family=fc"])["seed"]) == {0, 1, 2}
    assert filter_records(frame, ["family=fc", "seed=1"])["seed"].tolist() == [1]
    with pytest.raises(ValueError, match="no column 'colour'"):
        filter_records(frame, ["colour=red"])


def test_rows_sort_by_the_requested_column():
    table = summary_table(pd.DataFrame(RECORDS), by=["test_accuracy_mean"])
    assert table["family"].tolist() == ["fc", "graph_conv"]
    with pytest.raises(ValueError, match="--by 'speed'"):
        summary_table(pd.DataFrame(RECORDS), by=["speed"])


def test_records_that_differ_beyond_the_described_fields_are_separate_rows():
    differing = [dict(entry, config={"train": {"lr": lr}, "seed": entry["seed"]}) for entry in RECORDS[:3] for lr in (0.1, 0.01)]
    assert len(summary_table(pd.DataFrame(differing))) == 2


def test_every_config_key_that_varies_is_a_column_of_every_table(tmp_path):
    # Rows differing only in readout and learning rate must say so (common practice, no source).
    from shiftbench.job import run_job
    from shiftbench.report import write_report
    from tests.conftest import composed

    small = ["data.samples_per_class=20", "data.nodes=12", "train.epochs=2", f"results_dir={tmp_path}"]
    for readout in ("mean", "flatten"):
        for lr in ("0.01", "0.001"):
            run_job(composed([*small, f"arch.readout={readout}", f"train.lr={lr}"]), tmp_path / "sweep", [], live=False)
    text = write_report([tmp_path / "sweep"], tmp_path / "out")
    csv = pd.read_csv(tmp_path / "out" / "summary.csv")
    markdown = (tmp_path / "out" / "summary.md").read_text()
    assert {"arch.readout", "train.lr"} <= set(csv.columns) and len(csv) == 4
    assert sorted(zip(csv["arch.readout"], csv["train.lr"])) == [("flatten", 0.001), ("flatten", 0.01), ("mean", 0.001), ("mean", 0.01)]
    header = next(line for line in text.splitlines() if line.startswith("row"))
    assert "arch.readout" in header and "train.lr" in header
    assert "| arch.readout | train.lr |" in markdown


def test_flagged_seeds_are_counted_in_their_row_and_kept_in_the_figures():
    flagged = [dict(entry, flags=["at_chance"] if entry["seed"] == 0 else []) for entry in RECORDS[:3]]
    table = summary_table(pd.DataFrame(flagged))
    assert table.loc[0, "flags"] == "1 of 3 seeds at chance"
    assert table.loc[0, "test_accuracy_mean"] == np.mean([0.70, 0.80, 0.75])


def test_a_family_near_chance_beside_a_better_one_gets_a_note_naming_its_readout(tmp_path):
    def config(family, readout):
        arch = {"family": family, **({"readout": readout} if readout else {})}
        return {"seed": 0, "arch": arch, "train": {"lr": 0.01}}

    entries = [
        dict(record("fc", "none", None, seed, accuracy), chance_accuracy=0.25, config=config("fc", None))
        for seed, accuracy in ((0, 0.95), (1, 0.93))
    ] + [
        dict(record("graph_conv", "native", 3, seed, accuracy), chance_accuracy=0.25, config=config("graph_conv", "mean"))
        for seed, accuracy in ((0, 0.26), (1, 0.27))
    ]
    for number, entry in enumerate(entries):
        write_record(tmp_path / str(number), entry)
    text = write_report([tmp_path], tmp_path)
    assert "note: graph_conv's best row scores 0.265, near chance (0.250), while fc reaches 0.940" in text
    assert "arch.readout=mean" in text and "try arch.readout=flatten" in text
    assert "near chance" in (tmp_path / "summary.md").read_text()


def test_no_note_when_every_family_is_near_chance(tmp_path):
    entries = [dict(record(family, "native", 3, 0, 0.26), chance_accuracy=0.25) for family in ("fc", "graph_conv")]
    for number, entry in enumerate(entries):
        write_record(tmp_path / str(number), entry)
    assert "near chance" not in write_report([tmp_path], tmp_path)


def test_a_native_graph_row_names_the_graph_it_stood_for():
    table = summary_table(pd.DataFrame([dict(RECORDS[3], graph_name="roads.csv")]))
    assert table.loc[0, "graph"] == "native: roads.csv"


def test_a_nested_seed_that_follows_the_run_seed_does_not_split_a_row():
    # A study's rewired control draws a new rewiring per training seed (graph.seed: ${seed}).
    entries = [dict(record("graph_conv", "rewired", 3, seed, 0.3 + seed / 100),
                    config={"seed": seed, "graph": {"source": "rewired", "seed": seed}}) for seed in range(3)]
    table = summary_table(pd.DataFrame(entries))
    assert len(table) == 1 and table.loc[0, "seeds"] == 3 and "graph.seed" not in table.columns


def test_a_nested_seed_that_only_sometimes_equals_the_run_seed_stays_part_of_the_setting():
    # data.seed=0 is the data's own seed: it matches run seed 0 by coincidence only.
    entries = [dict(record("fc", "none", None, seed, 0.7), config={"seed": seed, "data": {"seed": 0}}) for seed in range(3)]
    table = summary_table(pd.DataFrame(entries))
    assert len(table) == 1 and table.loc[0, "seeds"] == 3


def test_a_report_on_graph_model_records_opens_with_the_graph_check_of_their_data(tmp_path):
    # The records' own data (the most common data config, loaded again) on its native graph.
    from shiftbench.job import run_job
    from tests.conftest import composed

    small = ["data.samples_per_class=20", "data.nodes=12", "train.epochs=2", f"results_dir={tmp_path}"]
    for family in ("fc", "graph_conv"):
        run_job(composed([*small, f"arch={family}"]), tmp_path / "sweep", [], live=False, quiet=True)
    text = write_report([tmp_path / "sweep"], tmp_path / "out")
    markdown = (tmp_path / "out" / "summary.md").read_text()
    assert "## Graph check: sensor_regimes on its native graph (sensor_network), before any training" in markdown
    assert markdown.index("## Graph check") < markdown.index("| graph |") and "| Moran's I |" in markdown
    assert "The signals are" in markdown and "graph check" not in text  # the terminal keeps to the table


def test_a_report_on_records_without_a_graph_model_has_no_graph_check(tmp_path):
    for number, entry in enumerate(RECORDS[:3]):
        write_record(tmp_path / str(number), entry)
    write_report([tmp_path], tmp_path)
    assert "Graph check" not in (tmp_path / "summary.md").read_text()
