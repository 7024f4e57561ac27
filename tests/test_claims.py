"""The claim checks: each verdict follows from its evidence, including a planted failure."""

import json

import pandas as pd
import pytest

from shiftbench import claims
from shiftbench.claims_report import write_claims
from shiftbench.data import sensor_regimes

CLAIM_IDS = [
    "line_graph_equivalence", "undirected_path_symmetry", "parameters_vs_nodes",
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


def test_path_filters_fit_symmetric_kernels_only():
    # Reference outputs from torch.nn.Conv1d with a causal and a symmetric kernel.
    claim = claims.undirected_path_symmetry(nodes=40)
    assert claim.verdict == "holds_with_caveat"
    assert claim.evidence["relative_residual_symmetric_kernel"] < 1e-8
    assert claim.evidence["relative_residual_causal_kernel"] > 0.1


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


def test_graph_matters_compares_native_with_rewired_and_line_by_seed():
    rows = [
        {"status": "completed", "family": "graph_conv", "graph": graph, "nodes": 64, "seed": seed,
         "data": "sensor_regimes", "operator": "adjacency",
         "test_accuracy": accuracy + 0.01 * seed, "path": f"{graph}/{seed}"}
        for seed in range(3) for graph, accuracy in (("native", 0.95), ("rewired", 0.3), ("line", 0.32))
    ]
    claim = claims.graph_matters(pd.DataFrame(rows))
    assert claim.verdict == "holds"
    assert claim.evidence["native_minus_rewired"]["mean"] == pytest.approx(0.65)
    assert claims.graph_matters(pd.DataFrame()).verdict == "not_enough_evidence"


def test_claims_files_carry_every_id_in_order(tmp_path, small_demo):
    text = write_claims([tmp_path], tmp_path, seeds=(0,), demo=small_demo, epochs=3)
    written = json.loads((tmp_path / "claims.json").read_text())
    assert [claim["id"] for claim in written["claims"]] == CLAIM_IDS
    assert all(claim["verdict"] in claims.VERDICTS for claim in written["claims"])
    assert "## graph_matters: not_enough_evidence" in text
    assert [row["nodes"] for row in written["analyses"]["transfer"]] == [24, 48, 96]
    assert (tmp_path / "frequency_responses.png").stat().st_size > 1000
