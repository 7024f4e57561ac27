"""The textbook claims, checked on the user's own numbers, each with its verdict and evidence.

Claims that need trained models are computed here on the data (small, seeded runs); claims about
how figures grow with size read the records of a study (the ``claims`` study writes them).
"""

from __future__ import annotations

import json
import math
from dataclasses import asdict, dataclass, field, replace
from typing import Any, Callable

import numpy as np
import pandas as pd
import torch

from shiftbench.config import TrainConfig
from shiftbench.data.dataset import Dataset
from shiftbench.graphs.graph import Graph
from shiftbench.graphs.operators import shift_operator
from shiftbench.graphs.sources import cycle_graph, line_graph, path_graph
from shiftbench.models import FullyConnected, ShiftPolynomialNet, LineConv
from shiftbench.models.mapping import line_conv_to_graph_conv
from shiftbench.models.shift_polynomial import ShiftPolynomialLayer
from shiftbench.models.shift_polynomial import kernel_to_taps
from shiftbench.records import computed_content, with_scores
from shiftbench.registry import TASKS, Task
from shiftbench.report import t_interval
from shiftbench.training import seed_everything, train

VERDICTS = ("holds", "holds_with_caveat", "does_not_hold", "not_enough_evidence")
# Float32 agreement required of two computations of the same function.
TOLERANCE = 1e-5
CHANNELS, ORDER = [8, 8], 3


@dataclass
class Claim:
    """One checked claim: a stable ``id``, its statement, the verdict and what it rests on."""

    id: str
    statement: str
    verdict: str
    evidence: dict[str, Any]
    explanation: str = ""
    records: list[str] = field(default_factory=list)

    def as_dict(self) -> dict[str, Any]:
        return asdict(self)


def _logits(model: torch.nn.Module, signals: np.ndarray) -> torch.Tensor:
    model.eval()
    with torch.no_grad():
        return model(torch.from_numpy(signals))


def readout_for(task: Task) -> str:
    """The readout a claim's networks use for ``task``: the per-node map for a node task."""
    return "node" if task.head == "nodes" else "mean"


def _transfer(
    dataset: Dataset, seed: int, boundary: str, config: TrainConfig, taps_from: Callable, task: Task
) -> dict[str, float]:
    """Train a line_conv, map its weights into a graph_conv on the line graph (or cycle), and
    compare the two on the test split (their outputs, and the task's test figure)."""
    seed_everything(seed)
    cnn = LineConv(dataset.nodes, dataset.features, CHANNELS, dataset.classes, ORDER, boundary=boundary,
                   readout=readout_for(task))
    result = train(cnn, dataset, config, seed, task=task)
    graph = cycle_graph(dataset.nodes) if boundary == "circular" else line_graph(dataset.nodes)
    gnn = line_conv_to_graph_conv(cnn, shift_operator(graph, "adjacency", "none"), taps_from)
    test = dataset.signals[dataset.splits.test]
    cnn_logits, gnn_logits = _logits(cnn, test), _logits(gnn, test)
    targets = torch.from_numpy(dataset.labels[dataset.splits.test])
    return {
        "max_abs_logit_difference": float((cnn_logits - gnn_logits).abs().max()),
        f"cnn_test_{task.metric}": result.test_score,
        f"gnn_test_{task.metric}": task.score(gnn_logits, targets),
    }


def _parity(dataset: Dataset, seed: int, config: TrainConfig, taps_from: Callable, task: Task) -> dict[str, float]:
    """Train a line_conv and a graph_conv from mapped initial weights on the same batches and
    compare their learning curves epoch by epoch, in float64: the two compute the same function
    by different routes, and float32 rounding would make their paths drift apart."""
    seed_everything(seed)
    dataset = replace(dataset, signals=dataset.signals.astype(np.float64))
    cnn = LineConv(dataset.nodes, dataset.features, CHANNELS, dataset.classes, ORDER, readout=readout_for(task)).double()
    shift = shift_operator(line_graph(dataset.nodes), "adjacency", "none").double()
    gnn = line_conv_to_graph_conv(cnn, shift, taps_from).double()
    cnn_curve = pd.DataFrame(train(cnn, dataset, config, seed, task=task).curve)
    gnn_curve = pd.DataFrame(train(gnn, dataset, config, seed, task=task).curve)
    epochs = min(len(cnn_curve), len(gnn_curve))
    difference = (cnn_curve.iloc[:epochs] - gnn_curve.iloc[:epochs]).abs()
    return {
        "epochs_compared": epochs,
        "max_train_loss_difference": float(difference["train_loss"].max()),
        f"max_val_{task.metric}_difference": float(difference[f"val_{task.metric}"].max()),
    }


def line_graph_equivalence(
    dataset: Dataset, seeds: tuple[int, ...] = (0, 1, 2), epochs: int = 20, taps_from: Callable = kernel_to_taps,
    task: Task | None = None,
) -> Claim:
    """(a) weight transfer on the line graph, (b) training parity, (c) transfer on the cycle,
    each on the data's own task (classification by default)."""
    task = task or TASKS["classification"]
    config = TrainConfig(epochs=epochs, patience=epochs)
    transfer = [_transfer(dataset, seed, "zero", config, taps_from, task) for seed in seeds]
    cycle = [_transfer(dataset, seed, "circular", config, taps_from, task) for seed in seeds]
    parity = [_parity(dataset, seed, config, taps_from, task) for seed in seeds]

    def agrees(runs: list[dict[str, float]]) -> bool:
        # An accuracy agrees only exactly (one flipped sample moves it by 1/n); an error to
        # float32 rounding.
        return all(
            run["max_abs_logit_difference"] <= TOLERANCE
            and math.isclose(run[f"cnn_test_{task.metric}"], run[f"gnn_test_{task.metric}"], rel_tol=TOLERANCE, abs_tol=0)
            for run in runs
        )

    # Parity is trained in float64, where the two routes agree to rounding (1e-9 on the loss
    # curve and on the validation figure: no validation sample may flip).
    transfer_holds = agrees(transfer) and agrees(cycle)
    parity_holds = all(run["max_train_loss_difference"] <= 1e-9 and run[f"max_val_{task.metric}_difference"] <= 1e-9
                       for run in parity)
    figures = [value for run in transfer + cycle + parity for value in run.values()]
    if not all(math.isfinite(value) for value in figures):
        # A split without targets scores NaN, and NaN agrees with nothing, itself included.
        verdict, why = "not_enough_evidence", "some figures are not finite (a split with no targets scores NaN)"
    elif not transfer_holds:
        verdict, why = "does_not_hold", "the mapped networks disagree beyond float32 rounding"
    elif not parity_holds:
        verdict, why = "does_not_hold", "trained side by side in float64, the two networks' curves parted"
    else:
        verdict, why = "holds", ""
    return Claim(
        id="line_graph_equivalence",
        statement="A graph_conv on the directed line graph (cycle) computes exactly what a causal (circular) "
        "line_conv computes, once its taps are the CNN's flipped kernels.",
        verdict=verdict,
        evidence={"seeds": list(seeds), "weight_transfer_line": transfer, "training_parity": parity,
                  "weight_transfer_cycle": cycle, "tolerance": TOLERANCE},
        explanation=why,
    )


def _impulse_response(layer: ShiftPolynomialLayer, nodes: int, at: int) -> np.ndarray:
    """The layer's output to a unit impulse at node ``at`` (one channel in and out, no bias).

    Shapes: ``(1, nodes, 1)`` in -> ``(nodes,)`` out."""
    impulse = torch.zeros(1, nodes, 1, dtype=torch.float64)
    impulse[0, at, 0] = 1.0
    with torch.no_grad():
        return layer(impulse)[0, :, 0].numpy()


def undirected_path_symmetry(nodes: int = 64, order: int = ORDER, draws: int = 5, seed: int = 0) -> Claim:
    """Impulse responses of the tool's own graph-filter layer, with random taps: on the
    undirected path they are symmetric about the impulse; on the directed line graph the same
    taps give a one-sided (causal) response."""
    generator = torch.Generator().manual_seed(seed)
    middle = nodes // 2
    layers = {
        name: ShiftPolynomialLayer(shift_operator(graph, "adjacency", "none").double(), 1, 1, order, bias=False).double()
        for name, graph in (("path", path_graph(nodes)), ("line", line_graph(nodes)))
    }
    window = np.arange(1, order + 1)
    asymmetry, backward_reach = [], []
    for _ in range(draws):
        taps = torch.randn(order + 1, 1, 1, generator=generator, dtype=torch.float64)
        for layer in layers.values():
            with torch.no_grad():
                layer.taps.copy_(taps)
        path, line = (_impulse_response(layers[name], nodes, middle) for name in ("path", "line"))
        asymmetry.append(float(np.abs(path[middle + window] - path[middle - window]).max()))
        backward_reach.append(float(np.abs(line[middle - window]).max()))
    symmetric = max(asymmetry) <= 1e-12
    causal = max(backward_reach) <= 1e-12
    return Claim(
        id="undirected_path_symmetry",
        statement="On the undirected path, polynomial graph filters realize only symmetric kernels, so a GNN "
        "matches a 1-D CNN there only when the CNN's kernels are symmetric.",
        verdict="holds" if symmetric and causal else "does_not_hold",
        evidence={"nodes": nodes, "order": order, "random_tap_draws": draws,
                  "max_asymmetry_on_the_path": max(asymmetry), "max_backward_response_on_the_line": max(backward_reach)},
        explanation="" if symmetric and causal else "an impulse response broke the symmetry it should have",
    )


def node_outputs(dataset: Dataset, seed: int = 0, taps_from: Callable = kernel_to_taps) -> Claim:
    """For a value on every node: (a) a graph_conv stack with the per-node output map on the
    directed line graph computes what a causal line_conv producing a sequence computes, once its
    taps are the CNN's flipped kernels (random weights, the data's test signals); (b) a dense fc
    map from the signal to every node's value has ``(nodes * features + 1) * nodes`` parameters,
    growing with the nodes squared, while the filter stack's count does not depend on them
    (counted at 1, 2 and 4 times the data's nodes)."""
    from shiftbench.models import count_parameters

    seed_everything(seed)
    nodes, features = dataset.nodes, dataset.features
    cnn = LineConv(nodes, features, CHANNELS, 1, ORDER, readout="node").eval()
    gnn = line_conv_to_graph_conv(cnn, shift_operator(line_graph(nodes), "adjacency", "none"), taps_from).eval()
    test = dataset.signals[dataset.splits.test]
    difference = float((_logits(cnn, test) - _logits(gnn, test)).abs().max())
    sizes = [nodes, 2 * nodes, 4 * nodes]
    fc_counts = [count_parameters(FullyConnected(size, features, [], 1, head="nodes")) for size in sizes]
    filter_counts = [count_parameters(LineConv(size, features, CHANNELS, 1, ORDER, readout="node")) for size in sizes]
    growth = float(np.polyfit(np.log(sizes), np.log(fc_counts), 1)[0])  # the exponent of fc's count in nodes
    holds = difference <= TOLERANCE and 1.9 <= growth <= 2.1 and len(set(filter_counts)) == 1
    why = "" if holds else (
        "the mapped networks disagree beyond float32 rounding" if difference > TOLERANCE
        else "the parameter counts do not grow as stated"
    )
    return Claim(
        id="node_outputs",
        statement="With a value on every node, a graph_conv on the directed line graph computes what a causal "
        "line_conv producing a sequence computes, and a dense fc map's parameter count grows with the nodes "
        "squared while the filters' stays constant.",
        verdict="holds" if holds else "does_not_hold",
        evidence={"max_abs_output_difference": difference, "tolerance": TOLERANCE, "nodes": sizes,
                  "fc_parameters": fc_counts, "fc_growth_exponent": growth, "filter_parameters": filter_counts},
        explanation=why,
    )


def permutation_equivariance(dataset: Dataset, graph: Graph, seed: int = 0, task: Task | None = None) -> Claim:
    """Relabel the nodes of ``graph`` and ``dataset``'s signals; compare the three families'
    outputs (for a task on every node, the relabelled outputs with the original ones relabelled)."""
    task = task or TASKS["classification"]
    seed_everything(seed)
    permutation = torch.randperm(dataset.nodes)
    relabelled = graph.permuted(permutation)
    x = torch.from_numpy(dataset.signals[dataset.splits.test])
    readout = readout_for(task)
    gnn = ShiftPolynomialNet(shift_operator(graph), dataset.features, CHANNELS, dataset.classes, ORDER, readout=readout)
    moved = ShiftPolynomialNet(shift_operator(relabelled), dataset.features, CHANNELS, dataset.classes, ORDER, readout=readout)
    moved.load_state_dict(gnn.state_dict())
    fc = FullyConnected(dataset.nodes, dataset.features, [64], dataset.classes, head=task.head)
    cnn = LineConv(dataset.nodes, dataset.features, CHANNELS, dataset.classes, ORDER, readout=readout)

    def relabel(outputs: torch.Tensor) -> torch.Tensor:
        return outputs[:, permutation] if task.head == "nodes" else outputs

    with torch.no_grad():
        differences = {
            "graph_conv": float((moved(x[:, permutation]) - relabel(gnn(x))).abs().max()),
            "fc": float((fc(x[:, permutation]) - relabel(fc(x))).abs().max()),
            "line_conv": float((cnn(x[:, permutation]) - relabel(cnn(x))).abs().max()),
        }
    holds = differences["graph_conv"] <= TOLERANCE and min(differences["fc"], differences["line_conv"]) > 1e-3
    return Claim(
        id="permutation_equivariance",
        statement="Relabelling the nodes (of graph and signals alike) leaves graph_conv's outputs unchanged (or, "
        "for outputs on every node, relabels them alike) and changes fc's and line_conv's.",
        verdict="holds" if holds else "does_not_hold",
        evidence={"graph": graph.name, "max_abs_logit_difference": differences},
    )


def _completed(records: pd.DataFrame, data_nodes: bool = True) -> pd.DataFrame:
    if records.empty or "status" not in records:
        return records
    frame = records[records["status"] == "completed"]
    return frame.dropna(subset=["nodes"]) if data_nodes else frame


def parameters_vs_nodes(records: pd.DataFrame) -> Claim:
    """From runs at several node counts: fc's count grows linearly, the convolutions' do not."""
    frame = _completed(records)
    families = {family: group for family, group in frame.groupby("family")} if not frame.empty else {}
    statement = ("fc's parameter count grows linearly with the number of nodes, while line_conv's and "
                 "graph_conv's stay constant (or grow only through a flatten readout).")
    if "fc" not in families or families["fc"]["nodes"].nunique() < 3:
        return Claim("parameters_vs_nodes", statement, "not_enough_evidence", {"needs": "fc records at 3+ node counts"})
    fc = families["fc"].drop_duplicates("nodes")
    slope, intercept = np.polyfit(fc["nodes"].astype(float), fc["parameters"].astype(float), 1)
    predicted = slope * fc["nodes"].astype(float) + intercept
    residual = float(((fc["parameters"] - predicted) ** 2).sum())
    total = float(((fc["parameters"] - fc["parameters"].mean()) ** 2).sum())
    evidence: dict[str, Any] = {"fc_slope_per_node": float(slope), "fc_r_squared": 1 - residual / total if total else 1.0}
    constant = True
    for family in ("line_conv", "graph_conv"):
        if family in families:
            group = families[family]
            readouts = {config["arch"].get("readout") for config in group["config"] if isinstance(config, dict)}
            counts = sorted(group["parameters"].astype(int).unique().tolist())
            evidence[family] = {"parameter_counts": counts, "readouts": sorted(r for r in readouts if r)}
            constant &= len(counts) == 1 or "flatten" in readouts
    holds = evidence["fc_r_squared"] > 0.999 and slope > 0 and constant
    return Claim("parameters_vs_nodes", statement, "holds" if holds else "does_not_hold", evidence,
                 records=sorted(frame["path"].dropna().tolist()))


def signed_scores(frame: pd.DataFrame) -> pd.Series:
    """The records' test figures signed so that larger is better (an error negated); records
    given without ``load_records``' score columns get them here."""
    if frame.empty:
        return pd.Series(dtype=float)
    if "test_score" not in frame:
        frame = with_scores(frame.copy())
    return frame["test_score"].astype(float) * frame["better"].map({"higher": 1.0, "lower": -1.0})


def _metric(frame: pd.DataFrame) -> str:
    return str(frame["metric"].iloc[0]) if not frame.empty and "metric" in frame else "accuracy"


def accuracy_vs_nodes(records: pd.DataFrame) -> Claim:
    """The slope of the test figure (signed: larger is better) against log2(nodes), per seed,
    then its interval over seeds."""
    frame = _completed(records)
    if not frame.empty:  # graph_conv on the graph the data carries, not on the control graphs
        frame = frame[(frame["family"] != "graph_conv") | (frame["graph"] == "native")]
        frame = frame.assign(signed=signed_scores(frame))
    statement = (f"At a fixed training size, fc's test {_metric(frame)} degrades faster with the number of nodes "
                 "than graph_conv's.")
    slopes: dict[str, dict[str, float]] = {}
    for family, group in (frame.groupby("family") if not frame.empty else []):
        per_seed = [
            np.polyfit(np.log2(runs["nodes"].astype(float)), runs["signed"].astype(float), 1)[0]
            for _, runs in group.groupby("seed") if runs["nodes"].nunique() >= 3
        ]
        if len(per_seed) >= 2:
            low, high = t_interval(float(np.mean(per_seed)), float(np.std(per_seed, ddof=1)), len(per_seed))
            slopes[family] = {"slope_per_doubling": float(np.mean(per_seed)), "ci95_low": low, "ci95_high": high,
                              "seeds": len(per_seed)}
    if "fc" not in slopes or "graph_conv" not in slopes:
        return Claim("accuracy_vs_nodes", statement, "not_enough_evidence", {"needs": "fc and graph_conv at 3+ node counts, 2+ seeds"})
    fc, gnn = slopes["fc"], slopes["graph_conv"]
    if fc["ci95_high"] < gnn["ci95_low"]:
        verdict, why = "holds", "fc's slope interval lies wholly below graph_conv's"
    elif fc["slope_per_doubling"] < gnn["slope_per_doubling"]:
        verdict, why = "holds_with_caveat", "fc's mean slope is lower, but the intervals overlap"
    else:
        verdict, why = "does_not_hold", "on this data fc does not degrade faster than graph_conv"
    return Claim("accuracy_vs_nodes", statement, verdict, slopes, why, sorted(frame["path"].dropna().tolist()))


def _like_for_like(config: dict[str, Any]) -> str:
    """What must match for two graph_conv runs to be compared: the whole computed config except
    the seed and the graph's source and own parameters (its operator and scaling must match)."""
    content = {key: value for key, value in computed_content(config).items() if key != "seed"}
    graph = content.get("graph", {})
    content["graph"] = {key: graph.get(key) for key in ("operator", "scale")}
    return json.dumps(content, sort_keys=True, default=str)


def graph_matters(records: pd.DataFrame) -> Claim:
    """graph_conv on the native graph against a degree-preserving rewiring of it (and the line
    graph), paired by seed among runs whose configs are identical apart from graph and seed.

    Holds when the native-minus-rewired interval (of test figures signed so that larger is
    better) lies above 0; not enough evidence when the mean is above 0 but the interval reaches
    it (with about how many seeds would show it); does not hold when the mean is not above 0.
    The line graph is evidence beside it, not a way to hold."""
    frame = _completed(records)
    statement = "graph_conv is more accurate on the native graph than on a degree-preserving rewiring of it or on the line graph."
    if not frame.empty:
        frame = frame.assign(signed=signed_scores(frame))
    gnn = frame[frame["family"] == "graph_conv"] if not frame.empty else frame
    if not gnn.empty and "config" in gnn:
        gnn = gnn[gnn["config"].map(lambda config: isinstance(config, dict))]
    evidence: dict[str, Any] = {}
    used: set[str] = set()
    for other in ("rewired", "line"):
        pairs = []
        for _, runs in (gnn.groupby(gnn["config"].map(_like_for_like)) if not gnn.empty else []):
            by_seed = runs.pivot_table(index="seed", columns="graph", values="signed", aggfunc="mean")
            if "native" not in by_seed or other not in by_seed:
                continue
            both = by_seed[["native", other]].dropna()
            pairs += (both["native"] - both[other]).tolist()
            used.update(runs[runs["seed"].isin(both.index) & runs["graph"].isin(["native", other])]["path"].dropna())
        if len(pairs) < 2:
            continue
        low, high = t_interval(float(np.mean(pairs)), float(np.std(pairs, ddof=1)), len(pairs))
        evidence[f"native_minus_{other}"] = {"mean": float(np.mean(pairs)), "ci95_low": low, "ci95_high": high, "pairs": len(pairs)}
    evidence["records_left_out"] = len(set(gnn["path"].dropna()) - used) if not gnn.empty else 0
    if "native_minus_rewired" not in evidence:
        evidence["needs"] = "graph_conv on the native graph and a rewiring of it, same config otherwise, 2+ seeds"
        return Claim("graph_matters", statement, "not_enough_evidence", evidence)
    found = evidence["native_minus_rewired"]
    if found["ci95_low"] > 0:
        verdict, why = "holds", ""
    elif found["mean"] > 0:
        seeds = seeds_to_show(found["mean"], found["ci95_high"] - found["mean"], found["pairs"])
        more = f"about {seeds} seeds would show it at this mean and spread" if seeds else "more seeds would not show it"
        verdict, why = "not_enough_evidence", f"the native graph wins on average, but the interval reaches 0: {more}"
    else:
        verdict, why = "does_not_hold", "a rewiring with the same degrees does as well as the native graph on average"
    return Claim("graph_matters", statement, verdict, evidence, why, records=sorted(used))


def seeds_to_show(mean: float, half_width: float, pairs: int, most: int = 200) -> int | None:
    """The fewest paired seeds whose 95% t interval would lie above 0 at the observed ``mean``
    and spread (recovered from the interval's ``half_width`` over ``pairs``): the smallest
    ``n`` with ``t_{n-1} s / sqrt(n) < mean``; None beyond ``most``."""
    from scipy import stats

    spread = half_width * np.sqrt(pairs) / float(stats.t.ppf(0.975, pairs - 1))
    for count in range(max(pairs, 2), most + 1):
        if float(stats.t.ppf(0.975, count - 1)) * spread / np.sqrt(count) < mean:
            return count
    return None
