"""The benchmark compares like with like: every implementation computes the same layer.

References: torch.nn.Conv1d and a channels-last torch Conv2d (line graph), PyG's TAGConv with
``normalize=False`` on disjoint copies, and Horner's rule with a dense ``S``.
"""

import json

import pytest

from benchmarks.layers import RESULT_KEYS, measure_group, write_results


@pytest.mark.parametrize("graph", ["line", "knn"])
def test_every_implementation_agrees_with_shiftbench_on_a_small_case(graph):
    rows = measure_group(graph, 64, 2, (2,))
    measured = [row for row in rows if "median_ms" in row]
    expected = {"shiftbench", "tagconv", "dense"} | ({"conv1d", "conv2d_channels_last"} if graph == "line" else set())
    assert {row["implementation"] for row in measured} == expected
    assert {row["pass"] for row in measured} == {"forward", "forward_backward"}
    assert all(row["relative_difference_to_shiftbench"] < 1e-5 for row in measured)
    assert all(row["median_ms"] > 0 and row["peak_rss_mb"] > 0 for row in measured)


def test_the_result_file_holds_exactly_the_documented_keys(tmp_path):
    rows = measure_group("grid", 36, 2, (1,))
    limits = {"date": "today", "cpu": "this machine", "cores": 2, "torch": "2", "copy_bandwidth_gbps": 20.0,
              "matmul_gflops": 100.0, "wall_seconds": 60.0}
    write_results(rows, limits, tmp_path)
    entries = json.loads((tmp_path / "layers.json").read_text())
    assert len(entries) == 6 and all(tuple(entry) == RESULT_KEYS for entry in entries)  # 3 implementations, 2 passes
    assert "| grid | 36 | 2 | 1 | forward |" in (tmp_path / "layers.md").read_text()


def test_the_arithmetic_bound_counts_the_tap_products_as_torch_counts_them():
    # Reference: torch.utils.flop_counter.FlopCounterMode (2 FLOPs a multiply-add of a matmul).
    # Order 0 leaves the tap product alone: 2 N B F^2 FLOPs.
    import torch
    from torch.utils.flop_counter import FlopCounterMode

    from benchmarks.measure import arithmetic_flops
    from shiftbench.graphs.operators import shift_operator
    from shiftbench.graphs.standard import path_graph
    from shiftbench.models.shift_polynomial import ShiftPolynomialLayer

    layer = ShiftPolynomialLayer(shift_operator(path_graph(50)), 16, 16, 0, bias=False, structured=False)
    with FlopCounterMode(display=False) as counter:
        layer(torch.randn(8, 50, 16))
    assert counter.get_total_flops() == arithmetic_flops(50, 8, 16, 0, 98, "forward") == 2 * 50 * 8 * 16 * 16
