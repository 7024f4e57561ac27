"""Evaluate every claim and run the analyses on the data and graph a results folder holds;
write ``claims.json`` and ``claims.md``.

The computed claims and the analyses run on the folder's own data and graph (the data config
its records share, the graph its graph_conv records used); only a folder without usable records
falls back to the built-in demo, and the output says so. A claim without evidence says which
runs would supply it, as a command to paste.
"""

from __future__ import annotations

import json
from collections import Counter
from collections.abc import Iterable
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
from omegaconf import OmegaConf

from shiftbench import claims, plots
from shiftbench.config import ConfigError, TrainConfig, most_common_config, validate_group
from shiftbench.data import Dataset, load_dataset, sensor_regimes
from shiftbench.data.sensor_regimes import regime_responses
from shiftbench.graph_check import check_graph, claims_agreement, summary
from shiftbench.graphs import Graph, build_graph
from shiftbench.graphs.operators import shift_operator
from shiftbench.models import ShiftPolynomialNet
from shiftbench.records import load_records, write_atomic
from shiftbench.registry import TASKS, Task
from shiftbench.robustness import perturbation_table, score_on_test, transfer_table
from shiftbench.spectral import frequencies, layer_responses, summarize
from shiftbench.training import seed_everything, train

# Without graph_conv records to follow, the analyses filter with the normalized adjacency
# (eigenvalues in [-1, 1]), the operator the demo's true responses are stated for.
DEFAULT_GRAPH = {"source": "native", "operator": "normalized_adjacency", "scale": "none"}
SIZE_FACTORS = (1, 2, 4)


@dataclass
class Subject:
    """What the computed claims and the analyses run on.

    Attributes:
        data: the validated data config; graph: the validated graph config.
        origin: where they come from, said in every output (the folder's records, or the demo
            and why).
        overrides: the command-line overrides that select this data (for suggested commands).
        task: the task the records learn (classification for the demo).
    """

    dataset: Dataset
    data: Any
    graph_config: Any
    graph: Graph
    origin: str
    overrides: list[str]
    task: Task = field(default_factory=lambda: TASKS["classification"])

    def describe(self) -> dict[str, Any]:
        return {"data": self.dataset.name, "data_source": self.data.source, "nodes": self.dataset.nodes, "task": self.task.name,
                "graph": self.graph.name, "graph_source": self.graph_config.source,
                "operator": self.graph_config.operator, "scale": self.graph_config.scale, "from": self.origin}


def demo_subject(demo: Dataset, why: str) -> Subject:
    graph_config = validate_group("graph", OmegaConf.create(DEFAULT_GRAPH))
    data = validate_group("data", OmegaConf.create({"source": "sensor_regimes", "nodes": demo.nodes}))
    return Subject(demo, data, graph_config, build_graph(graph_config, demo), f"the built-in demo ({why})", [])


def subject_of(records: pd.DataFrame, where: str, demo: Dataset) -> Subject:
    """The data most of the completed records under ``where`` were trained on, and the graph
    (with its operator) most of their graph_conv records used, the native graph first; the demo
    when there are none or their data cannot be loaded here."""
    usable = records[records["status"].eq("completed") & records["config"].map(lambda c: isinstance(c, dict))] \
        if not records.empty and "config" in records else pd.DataFrame()
    if usable.empty:
        return demo_subject(demo, f"no completed records under {where}")
    data_dict = most_common_config((config["data"] for config in usable["config"]), "data")
    mine = usable[usable["config"].map(lambda config: config["data"] == data_dict)]
    graphs = [config["graph"] for config, family in zip(mine["config"], mine["family"]) if family == "graph_conv"]
    # The data's own graph before the controls (rewired, line) that share the folder with it.
    graph_dict = (most_common_config((g for g in graphs if g.get("source") == "native"), "graph")
                  or most_common_config(graphs, "graph") or DEFAULT_GRAPH)
    try:
        data = validate_group("data", OmegaConf.create(data_dict))
        graph_config = validate_group("graph", OmegaConf.create(graph_dict))
        dataset = load_dataset(data)
        graph = build_graph(graph_config, dataset)
    except ConfigError as error:
        return demo_subject(demo, f"the data of the records under {where} cannot be loaded here: {error}")
    lines = [line for overrides in mine.get("overrides", []) if isinstance(overrides, list) for line in overrides]
    selecting = list(dict.fromkeys(line for line in lines if line.lstrip("+").startswith(("data", "task"))))
    task = TASKS[Counter(mine["task"]).most_common(1)[0][0]] if "task" in mine else TASKS["classification"]
    return Subject(dataset, data, graph_config, graph, f"the records under {where}", selecting, task)


def evaluate(records: pd.DataFrame, seeds: tuple[int, ...], subject: Subject) -> list[claims.Claim]:
    """The claims in a stable order: computed ones on ``subject``'s data and graph, the rest
    from ``records``."""
    return [
        claims.line_graph_equivalence(subject.dataset, seeds, task=subject.task),
        claims.node_outputs(subject.dataset),
        claims.undirected_path_symmetry(),
        claims.parameters_vs_nodes(records),
        claims.accuracy_vs_nodes(records),
        claims.permutation_equivariance(subject.dataset, subject.graph, task=subject.task),
        claims.graph_matters(records),
    ]


def suggest_runs(checked: list[claims.Claim], subject: Subject, folder: Path) -> None:
    """Give each claim short of evidence the command that would supply it (``evidence.run``)."""
    sizes = hasattr(subject.data, "nodes")
    for claim in checked:
        if claim.verdict != "not_enough_evidence":
            continue
        study = "families" if claim.id == "graph_matters" else "claims" if sizes else None
        if study is None:
            claim.evidence["run"] = (f"data {subject.dataset.name!r} has one node count, and this claim needs "
                                     "3+; see it on the demo: shiftbench -m +experiment=claims && "
                                     "shiftbench-claims results/claims")
        else:
            claim.evidence["run"] = " ".join(["shiftbench -m", f"+experiment={study}", *subject.overrides,
                                              f"hydra.sweep.dir={folder}", f"&& shiftbench-claims {folder}"])


def _true_responses(subject: Subject, eigenvalues: np.ndarray) -> tuple | None:
    """The demo's regimes' responses, where the data is the demo on the operator they are stated for."""
    if subject.data.source != "sensor_regimes" or subject.graph_config.operator != "normalized_adjacency":
        return None
    grid = np.linspace(eigenvalues.real.min(), eigenvalues.real.max(), 201)  # the spectrum this graph has
    classes = subject.dataset.classes
    return grid, {f"regime {c}": np.polyval(row[::-1], grid) for c, row in enumerate(regime_responses(classes, 6))}


def _transfer(model: ShiftPolynomialNet, subject: Subject) -> list[dict] | str:
    """Test accuracy of the trained model on the same kind of data at 1x, 2x and 4x the nodes,
    where the data source generates other sizes; else why not."""
    if not hasattr(subject.data, "nodes"):
        return f"not run: data {subject.dataset.name!r} comes at one node count"
    larger = [load_dataset(replace(subject.data, nodes=subject.dataset.nodes * factor)) for factor in SIZE_FACTORS]
    graph = subject.graph_config
    table = transfer_table(model, [(data, build_graph(graph, data)) for data in larger], graph.operator, graph.scale,
                           subject.task)
    return table.to_dict(orient="records")


def learned_filters(out: Path, subject: Subject, epochs: int = 60, seed: int = 0) -> dict:
    """Train a graph_conv on the subject's data and graph, plot its frequency responses (beside
    the demo's true ones when the data is the demo), and test it on perturbed graphs and, where
    the data comes at other sizes, on larger networks."""
    dataset, graph, config, task = subject.dataset, subject.graph, subject.graph_config, subject.task
    shift = shift_operator(graph, config.operator, config.scale)
    seed_everything(seed)
    model = ShiftPolynomialNet(shift, dataset.features, [16, 16], dataset.classes, order=3, readout=claims.readout_for(task))
    train(model, dataset, TrainConfig(epochs=epochs), seed, task=task)
    plotted = ["perturbation.png"]
    try:
        eigenvalues = frequencies(shift)
    except ValueError as error:
        responses = f"not drawn: {error}"
    else:
        summaries = [summarize(responses) for responses in layer_responses(model, eigenvalues)]
        plots.frequency_responses(eigenvalues, summaries, out / "frequency_responses.png", _true_responses(subject, eigenvalues))
        responses, plotted = "frequency_responses.png", ["frequency_responses.png", *plotted]
    perturbation = perturbation_table(model, dataset, graph, config.operator, config.scale, task=task)
    plots.perturbation(perturbation, out / "perturbation.png")
    test = f"test_{task.metric}"
    summary = perturbation.groupby(["mode", "fraction"])[test].agg(["mean", "min", "max"]).reset_index()
    return {
        "subject": subject.describe(),
        "graph_conv": {"operator": config.operator, "scale": config.scale, "seed": seed,
                       test: score_on_test(model, dataset, task)},
        "frequency_responses": responses,
        "perturbation": summary.to_dict(orient="records"),
        "transfer": _transfer(model, subject),
        "transfer_fc": f"fc cannot be evaluated at other sizes: its first layer takes exactly {dataset.nodes} inputs",
        "plots": plotted,
    }


def format_subject(subject: dict[str, Any]) -> str:
    """``data 'roads' (240 nodes), graph 'roads.csv' (source native, operator adjacency), from
    the records under results/mine``."""
    return (f"data {subject['data']!r} ({subject['nodes']} nodes), graph {subject['graph']!r} (source "
            f"{subject['graph_source']}, operator {subject['operator']}, scale {subject['scale']}), from {subject['from']}")


def format_analyses(analyses: dict) -> str:
    trained = analyses["graph_conv"]
    test = next(key for key in trained if key.startswith("test_"))
    metric = test[5:]
    short = "acc" if metric == "accuracy" else metric
    lines = [
        "## What the graph filters learned",
        "",
        f"A graph_conv trained on {format_subject(analyses['subject'])}: seed {trained['seed']}, test {metric} "
        f"{trained[test]:.3f}.",
        "",
    ]
    if analyses["frequency_responses"].endswith(".png"):
        lines += ["Its filters' frequency responses (beside the true ones where the data is the demo):", "",
                  "![frequency responses](frequency_responses.png)", ""]
    else:
        lines += [f"Frequency responses {analyses['frequency_responses']}.", ""]
    lines += [
        "### Stability under graph perturbation",
        "",
        f"| mode | edges perturbed | test {short} (mean) | min | max |",
        "| --- | ---: | ---: | ---: | ---: |",
    ]
    lines += [
        f"| {row['mode']} | {row['fraction']:.0%} | {row['mean']:.3f} | {row['min']:.3f} | {row['max']:.3f} |"
        for row in analyses["perturbation"]
    ]
    lines += ["", "![perturbation](perturbation.png)", "", "### Transfer across sizes", ""]
    if isinstance(analyses["transfer"], str):
        lines += [f"Transfer {analyses['transfer']}."]
    else:
        lines += [f"| nodes | test {short} |", "| ---: | ---: |"]
        lines += [f"| {row['nodes']} | {row[test]:.3f} |" for row in analyses["transfer"]]
    lines += ["", analyses["transfer_fc"] + ".", ""]
    return "\n".join(lines)


def _figures(evidence: object, prefix: str = "") -> list[str]:
    """Evidence flattened to ``key: value`` lines, numbers to 4 significant digits."""
    if isinstance(evidence, dict):
        return [line for key, value in evidence.items() for line in _figures(value, f"{prefix}{key}.")]
    if isinstance(evidence, list) and evidence and isinstance(evidence[0], dict):
        return [line for index, value in enumerate(evidence) for line in _figures(value, f"{prefix}{index}.")]
    shown = f"{evidence:.4g}" if isinstance(evidence, float) else str(evidence)
    return [f"{prefix.rstrip('.')}: {shown}"]


def format_claims(checked: list[claims.Claim]) -> str:
    lines = []
    for claim in checked:
        lines += [f"## {claim.id}: {claim.verdict}", "", claim.statement, ""]
        if claim.explanation:
            lines += [f"Why: {claim.explanation}.", ""]
        lines += [f"- {line}" for line in _figures(claim.evidence)]
        if claim.records:
            lines += [f"- records used: {len(claim.records)}"]
        lines.append("")
    return "\n".join(lines)


def write_claims(
    paths: Iterable[Path], out: Path, seeds: tuple[int, ...] = (0, 1, 2), demo: Dataset | None = None, epochs: int = 60
) -> str:
    """Check every claim, run the analyses on the folder's data and graph, write
    ``claims.json`` (``claims`` and ``analyses``, whose ``subject`` names the data and graph),
    ``claims.md`` and the plots into ``out``; return the claims as text. ``demo`` (default: the
    demo scenario at its defaults) serves only when the folders hold no usable records."""
    paths = list(paths)
    records = load_records(paths)
    where = ", ".join(map(str, paths))
    tasks = sorted(set(records.get("task", [])))
    if len(tasks) > 1:
        raise ValueError(f"the records under {where} learn different tasks ({', '.join(tasks)}); accepted: records of one task")
    subject = subject_of(records, where, demo if demo is not None else sensor_regimes())
    checked = evaluate(records, seeds, subject)
    suggest_runs(checked, subject, paths[0])
    analyses = learned_filters(out, subject, epochs)
    check = check_graph(subject.dataset, subject.dataset.native_graph, subject.task.name)
    matters = next(claim.verdict for claim in checked if claim.id == "graph_matters")
    found = {**summary(check), "agreement": claims_agreement(check, matters)}
    content = {"claims": [claim.as_dict() for claim in checked], "analyses": analyses, "graph_check": found}
    write_atomic(out / "claims.json", json.dumps(content, indent=2, default=float) + "\n")
    said = f"Computed claims and analyses ran on {format_subject(analyses['subject'])}."
    flagged = [f"Flag: {found['agreement']}"] if found["agreement"] else []
    checked_line = "\n".join([f"Graph check of {check.data} on its native graph ({check.graph}): {found['sentence']}",
                               *found["table"], *flagged])
    text = said + "\n\n" + checked_line + "\n\n" + format_claims(checked)
    write_atomic(out / "claims.md", "# Claims\n\n" + text + "\n" + format_analyses(analyses))
    return text + "\n" + format_analyses(analyses)
