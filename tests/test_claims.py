"""The claim checks: each verdict follows from its evidence, including a planted failure."""

import json

import numpy as np
import pandas as pd
import pytest

from shiftbench import claims
from shiftbench.claims_report import write_claims
from shiftbench.data import sensor_regimes

CLAIM_IDS = [
    "line_graph_equivalence", "node_outputs", "undirected_path_symmetry", "parameters_vs_nodes",
    "accuracy_vs_nodes", "permutation_equivariance", "graph_matters",
]


@pytest.fixture(scope="module")
def small_demo():
    return sensor_regimes(nodes=24, samples_per_class=40)


def test_line_graph_equivalence_holds_with_the_flipped_kernel(small_demo):
    # Source: torch.nn.Conv1d documentation (a cross-correlation, hence H_k = W[:, :, K - k]).
    claim = claims.line_graph_equivalence(small_demo, seeds=(0,), epochs=3)
    assert claim.verdict in ("holds", "holds_with_caveat")
    assert claim.evidence["weight_transfer_line"][0]["max_abs_logit_difference"] <= 1e-5


def test_a_planted_unflipped_mapping_is_caught(small_demo):
    claim = claims.line_graph_equivalence(small_demo, seeds=(0,), epochs=3, taps_from=lambda weight: weight.permute(2, 1, 0))
    assert claim.verdict == "does_not_hold"


def test_node_outputs_hold_with_the_flipped_kernel_and_count_fc_quadratically(small_demo):
    # Source: torch.nn.Conv1d documentation (as above); a dense map from nodes * features inputs
    # to nodes outputs has (nodes * features + 1) * nodes parameters (common practice, no source).
    claim = claims.node_outputs(small_demo)
    assert claim.verdict == "holds" and claim.evidence["max_abs_output_difference"] <= 1e-5
    assert claim.evidence["fc_parameters"] == [(nodes + 1) * nodes for nodes in (24, 48, 96)]
    assert len(set(claim.evidence["filter_parameters"])) == 1


def test_a_planted_unflipped_mapping_is_caught_on_node_outputs(small_demo):
    claim = claims.node_outputs(small_demo, taps_from=lambda weight: weight.permute(2, 1, 0))
    assert claim.verdict == "does_not_hold" and "disagree" in claim.explanation


def test_the_layer_on_the_undirected_path_has_symmetric_impulse_responses_only():
    # Common practice, no source: a polynomial in a symmetric shift gives a symmetric impulse
    # response; on the directed line graph the same taps respond causally.
    claim = claims.undirected_path_symmetry(nodes=40)
    assert claim.verdict == "holds"
    assert claim.evidence["max_asymmetry_on_the_path"] <= 1e-12
    assert claim.evidence["max_backward_response_on_the_line"] <= 1e-12


def test_permutation_equivariance_holds_for_graph_conv_only(small_demo):
    # Source: Gama, Bruna & Ribeiro 2020, "Stability properties of graph neural networks", IEEE TSP 68.
    claim = claims.permutation_equivariance(small_demo, small_demo.native_graph)
    assert claim.verdict == "holds"
    assert claim.evidence["max_abs_logit_difference"]["fc"] > 1e-3


def scaling_records(fc_accuracy, gnn_accuracy):
    rows = []
    for seed in range(3):
        for nodes in (16, 64, 256):
            for family, accuracy, parameters in (("fc", fc_accuracy, 17 * nodes + 4), ("graph_conv", gnn_accuracy, 500)):
                rows.append({
                    "status": "completed", "family": family, "graph": "native", "nodes": nodes, "seed": seed,
                    "parameters": parameters, "test_accuracy": accuracy(nodes) + 0.01 * seed,
                    "config": {"arch": {"readout": "mean"}}, "path": f"{family}/{nodes}/{seed}",
                })
    return pd.DataFrame(rows)


def test_parameter_growth_is_fitted_as_a_line_for_fc_and_constant_for_graph_conv():
    claim = claims.parameters_vs_nodes(scaling_records(lambda n: 0.8, lambda n: 0.9))
    assert claim.verdict == "holds"
    assert claim.evidence["fc_slope_per_node"] == pytest.approx(17.0)
    assert claim.evidence["fc_r_squared"] == pytest.approx(1.0)
    assert claim.evidence["graph_conv"]["parameter_counts"] == [500]


def test_accuracy_against_nodes_is_reported_honestly_either_way():
    falling = claims.accuracy_vs_nodes(scaling_records(lambda n: 1.0 - n / 1000, lambda n: 0.9))
    assert falling.verdict == "holds"
    rising = claims.accuracy_vs_nodes(scaling_records(lambda n: 0.5 + n / 1000, lambda n: 0.9))
    assert rising.verdict == "does_not_hold"


def gnn_record(graph: str, seed: int, accuracy: float, order: int = 3) -> dict:
    config = {"seed": seed, "data": {"source": "sensor_regimes"}, "arch": {"family": "graph_conv", "order": order},
              "graph": {"source": graph, "operator": "adjacency", "scale": "spectral", **({"seed": seed} if graph == "rewired" else {})}}
    return {"status": "completed", "family": "graph_conv", "graph": graph, "nodes": 64, "seed": seed, "config": config,
            "data": "sensor_regimes", "operator": "adjacency", "test_accuracy": accuracy, "path": f"{graph}/{order}/{seed}"}


def test_graph_matters_compares_native_with_rewired_and_line_by_seed():
    rows = [gnn_record(graph, seed, accuracy + 0.01 * seed)
            for seed in range(3) for graph, accuracy in (("native", 0.95), ("rewired", 0.3), ("line", 0.32))]
    claim = claims.graph_matters(pd.DataFrame(rows))
    assert claim.verdict == "holds"
    assert claim.evidence["native_minus_rewired"]["mean"] == pytest.approx(0.65)
    assert claims.graph_matters(pd.DataFrame()).verdict == "not_enough_evidence"


def test_graph_matters_pairs_only_identical_configs_and_counts_what_it_left_out():
    rows = [gnn_record(graph, seed, accuracy) for seed in range(3) for graph, accuracy in (("native", 0.9), ("rewired", 0.4))]
    rows += [gnn_record("native", seed, 0.1, order=6) for seed in range(3)]  # another order: never averaged in
    claim = claims.graph_matters(pd.DataFrame(rows))
    assert claim.evidence["native_minus_rewired"]["mean"] == pytest.approx(0.5)
    assert claim.evidence["records_left_out"] == 3 and len(claim.records) == 6


def test_graph_matters_needs_the_rewired_control_beating_the_line_graph_is_not_enough():
    rows = [gnn_record(graph, seed, accuracy) for seed in range(3) for graph, accuracy in (("native", 0.9), ("line", 0.3))]
    assert claims.graph_matters(pd.DataFrame(rows)).verdict == "not_enough_evidence"


def test_a_native_graph_no_better_than_its_rewiring_does_not_hold():
    # A planted failure: the "native" graph is as good as a scrambled one.
    rows = [gnn_record(graph, seed, accuracy) for seed, (native, rewired) in enumerate([(0.5, 0.52), (0.48, 0.47), (0.51, 0.53)])
            for graph, accuracy in (("native", native), ("rewired", rewired))]
    claim = claims.graph_matters(pd.DataFrame(rows))
    assert claim.verdict == "does_not_hold"


def test_claims_files_carry_every_id_in_order(tmp_path, small_demo):
    text = write_claims([tmp_path], tmp_path, seeds=(0,), demo=small_demo, epochs=3)
    written = json.loads((tmp_path / "claims.json").read_text())
    assert [claim["id"] for claim in written["claims"]] == CLAIM_IDS
    assert all(claim["verdict"] in claims.VERDICTS for claim in written["claims"])
    assert "## graph_matters: not_enough_evidence" in text
    assert written["graph_check"]["figures"]["data"] == small_demo.name and "Graph check of" in text
    assert [row["nodes"] for row in written["analyses"]["transfer"]] == [24, 48, 96]
    assert (tmp_path / "frequency_responses.png").stat().st_size > 1000


def test_a_scrambled_native_graph_does_not_hold_on_trained_runs(tmp_path):
    # A planted failure through the whole tool: the data's "native" graph is a thorough
    # rewiring of the graph its signals came from, so it carries nothing a rewiring lacks.
    from shiftbench.data import sensor_regimes
    from shiftbench.graphs.sources import rewired_graph
    from shiftbench.job import run_job
    from shiftbench.records import load_records
    from tests.conftest import composed

    demo = sensor_regimes(nodes=24, samples_per_class=40)
    split = np.zeros(demo.samples, dtype=int)
    split[demo.splits.val], split[demo.splits.test] = 1, 2
    np.savez(tmp_path / "signals.npz", signals=demo.signals[:, :, 0], labels=demo.labels, split=split)
    scrambled = rewired_graph(demo.native_graph, swaps_per_edge=20, seed=7)
    source, target = scrambled.edge_index.numpy()
    pd.DataFrame({"source": source, "target": target}).to_csv(tmp_path / "scrambled.csv", index=False)
    data = ["data=file", f"data.path={tmp_path / 'signals.npz'}", f"data.graph={tmp_path / 'scrambled.csv'}"]
    for seed in range(3):
        for graph in (["graph=native"], ["graph=rewired", f"graph.seed={seed}"]):
            overrides = [*data, *graph, f"seed={seed}", "train.epochs=15", f"results_dir={tmp_path / 'runs'}"]
            run_job(composed(overrides), None, overrides, live=False, quiet=True)
    claim = claims.graph_matters(load_records([tmp_path / "runs"]))
    assert claim.verdict == "does_not_hold", claim.evidence


def test_line_graph_equivalence_on_a_test_split_without_targets_is_not_enough_evidence():
    # NaN figures compare unequal to themselves (IEEE 754), so they cannot show a disagreement either.
    import dataclasses

    from shiftbench.data.sensor_dynamics import sensor_forecast
    from shiftbench.registry import TASKS

    dataset = sensor_forecast(nodes=12, samples=80)
    labels = dataset.labels.copy()
    labels[dataset.splits.test] = np.nan
    claim = claims.line_graph_equivalence(dataclasses.replace(dataset, labels=labels), seeds=(0,), epochs=2,
                                          task=TASKS["node_regression"])
    assert claim.verdict == "not_enough_evidence" and "not finite" in claim.explanation


def test_a_native_graph_ahead_on_average_with_an_interval_reaching_zero_is_not_enough_evidence_not_a_failure():
    # Differences +0.11, +0.02, +0.20: mean 0.11, standard deviation 0.09, 95% t interval
    # (2 degrees of freedom) -0.114 to 0.334: ahead, not shown. The seeds that would show it: the
    # smallest n with t_{n-1} s / sqrt(n) < mean, with scipy.stats.t's quantiles.
    from scipy import stats

    rows = [gnn_record(graph, seed, accuracy) for seed, (native, rewired) in enumerate([(0.61, 0.50), (0.52, 0.50), (0.70, 0.50)])
            for graph, accuracy in (("native", native), ("rewired", rewired))]
    claim = claims.graph_matters(pd.DataFrame(rows))
    assert claim.verdict == "not_enough_evidence"
    spread = float(np.std([0.11, 0.02, 0.20], ddof=1))
    expected = next(n for n in range(3, 100) if stats.t.ppf(0.975, n - 1) * spread / np.sqrt(n) < 0.11)
    assert f"about {expected} seeds would show it" in claim.explanation


def test_the_claims_flag_a_graph_the_signals_are_smooth_on_that_the_trained_runs_did_not_use():
    from shiftbench.graph_check import Comparison, GraphCheck, claims_agreement

    smooth = GraphCheck("d", "g", 10, 20, 5, 5, [Comparison("Moran's I", 0.5, 0.0, 0.05, 0.01, 99, True)])
    assert "yet the tuned graph models gained nothing" in claims_agreement(smooth, "does_not_hold")
    assert claims_agreement(smooth, "holds") is None and claims_agreement(smooth, "not_enough_evidence") is None
