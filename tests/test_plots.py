"""Plots exist as non-empty PNGs and draw exactly the table's rows."""

import pandas as pd
import pytest

from shiftbench import plots
from shiftbench.records import SCHEMA_VERSION, write_record
from shiftbench.report import summary_table

PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"  # Source: the PNG specification (W3C, 2003), section 5.2.


def records(tmp_path):
    rows = []
    for family, parameters in (("fc", 500), ("graph_conv", 80)):
        for nodes in (16, 64):
            for order in (1, 2):
                for seed in range(2):
                    folder = tmp_path / f"{family}-{nodes}-{order}-{seed}"
                    record = {
                        "schema_version": SCHEMA_VERSION, "status": "completed", "data": "demo", "family": family,
                        "graph": "native", "operator": "adjacency", "nodes": nodes, "order": order, "seed": seed,
                        "parameters": parameters * nodes if family == "fc" else parameters,
                        "test_accuracy": 0.5 + 0.1 * order + 0.01 * seed - 0.001 * nodes,
                        "train_seconds": 1.0, "epochs_run": 2, "path": str(folder),
                    }
                    write_record(folder, record)
                    pd.DataFrame({"epoch": [1, 2], "train_loss": [1.0, 0.5], "val_accuracy": [0.4, 0.6]}).to_csv(
                        folder / "curve.csv", index=False
                    )
                    rows.append(record)
    return summary_table(pd.DataFrame(rows))


def is_png(path):
    return path.stat().st_size > 1000 and path.read_bytes()[:8] == PNG_SIGNATURE


def test_accuracy_against_parameters_draws_every_row(tmp_path):
    table = records(tmp_path)
    path, points = plots.score_vs_parameters(table, tmp_path / "a.png")
    assert is_png(path)
    pd.testing.assert_series_equal(points["mean"], table["test_accuracy_mean"], check_names=False)
    assert points["x"].tolist() == table["parameters"].astype(float).tolist()


def test_accuracy_against_order_draws_every_row_with_an_order(tmp_path):
    table = records(tmp_path)
    path, points = plots.score_vs_order(table, tmp_path / "o.png")
    assert is_png(path)
    assert sorted(zip(points["order"], points["mean"])) == sorted(zip(table["order"], table["test_accuracy_mean"]))


def test_scaling_plot_draws_accuracy_and_parameters_per_node_count(tmp_path):
    table = records(tmp_path)
    path, points = plots.scaling(table, tmp_path / "s.png")
    assert is_png(path)
    expected = sorted(zip(table["family"], table["nodes"], table["parameters"], table["test_accuracy_mean"]))
    assert sorted(zip(points["family"], points["nodes"], points["parameters"], points["mean"])) == expected


def test_learning_curves_draw_each_seed_of_a_row_labelled_by_seed(tmp_path):
    table = records(tmp_path)
    path, points = plots.learning_curves(table.loc[0, "paths"], tmp_path / "c.png")
    assert is_png(path)
    assert sorted(points["run"].unique()) == ["seed 0", "seed 1"] and len(points) == 4


def test_standard_plots_pick_what_the_rows_vary_in(tmp_path):
    table = records(tmp_path)
    assert [p.name for p in plots.standard_plots(table, tmp_path)] == [
        "accuracy_vs_parameters.png", "accuracy_vs_order.png", "scaling.png"
    ]
    single = table[(table["nodes"] == 16) & (table["order"] == 1)]
    assert [p.name for p in plots.standard_plots(single, tmp_path)] == ["accuracy_vs_parameters.png"]


def test_accuracy_intervals_are_clipped_to_zero_and_one():
    # An accuracy lies in [0, 1] (common practice, no source): bars never leave it.
    errors = plots.clipped_error(pd.Series([0.98, 0.02, 0.5]), pd.Series([0.05, 0.05, float("nan")]))
    assert errors.ravel().tolist() == pytest.approx([0.05, 0.02, 0.0, 0.02, 0.05, 0.0])
