"""Evaluate every claim and write ``claims.json`` and ``claims.md``."""

from __future__ import annotations

import json
from collections.abc import Iterable
from pathlib import Path

import numpy as np
from shiftbench import claims, plots
from shiftbench.config import TrainConfig
from shiftbench.data import Dataset, sensor_regimes
from shiftbench.data.sensor_regimes import regime_responses
from shiftbench.graphs.operators import shift_operator
from shiftbench.models import ShiftPolynomialNet
from shiftbench.records import load_records, write_atomic
from shiftbench.robustness import accuracy_on_test, perturbation_table, transfer_table
from shiftbench.spectral import frequencies, layer_responses, summarize
from shiftbench.training import seed_everything, train

# The analyses train their graph_conv on the process's own operator (eigenvalues in [-1, 1]), so
# learned and true responses share one axis.
OPERATOR, SCALE = "normalized_adjacency", "none"
SIZE_FACTORS = (1, 2, 4)


def evaluate(paths: Iterable[Path], seeds: tuple[int, ...], demo: Dataset) -> list[claims.Claim]:
    """The claims in a stable order: computed ones on ``demo``, the rest from the records under
    ``paths``."""
    records = load_records(list(paths))
    return [
        claims.line_graph_equivalence(demo, seeds),
        claims.undirected_path_symmetry(),
        claims.parameters_vs_nodes(records),
        claims.accuracy_vs_nodes(records),
        claims.permutation_equivariance(demo),
        claims.graph_matters(records),
    ]


def learned_filters(out: Path, demo: Dataset, epochs: int = 60, seed: int = 0) -> dict:
    """Train a graph_conv on ``demo`` (a sensor_regimes dataset), plot its frequency responses
    beside the regimes' true ones, and test it on perturbed graphs and on larger networks of the
    same regimes."""
    shift = shift_operator(demo.native_graph, OPERATOR, SCALE)
    seed_everything(seed)
    model = ShiftPolynomialNet(shift, demo.features, [16, 16], demo.classes, order=3)
    train(model, demo, TrainConfig(epochs=epochs), seed)
    eigenvalues = frequencies(shift)
    summaries = [summarize(responses) for responses in layer_responses(model, eigenvalues)]
    grid = np.linspace(eigenvalues.real.min(), eigenvalues.real.max(), 201)  # the spectrum this graph has
    true = {f"regime {c}": np.polyval(row[::-1], grid) for c, row in enumerate(regime_responses(demo.classes, 6))}
    plots.frequency_responses(eigenvalues, summaries, out / "frequency_responses.png", (grid, true))
    perturbation = perturbation_table(model, demo, demo.native_graph, OPERATOR, SCALE)
    plots.perturbation(perturbation, out / "perturbation.png")
    larger = [sensor_regimes(nodes=demo.nodes * factor, samples_per_class=len(demo.labels) // demo.classes)
              for factor in SIZE_FACTORS]
    transfer = transfer_table(model, larger, OPERATOR, SCALE)
    summary = perturbation.groupby(["mode", "fraction"])["test_accuracy"].agg(["mean", "min", "max"]).reset_index()
    return {
        "graph_conv": {"operator": OPERATOR, "scale": SCALE, "seed": seed, "test_accuracy": accuracy_on_test(model, demo)},
        "perturbation": summary.to_dict(orient="records"),
        "transfer": transfer.to_dict(orient="records"),
        "transfer_fc": f"fc cannot be evaluated at other sizes: its first layer takes exactly {demo.nodes} inputs",
        "plots": ["frequency_responses.png", "perturbation.png"],
    }


def format_analyses(analyses: dict) -> str:
    trained = analyses["graph_conv"]
    lines = [
        "## What the graph filters learned",
        "",
        f"A graph_conv trained on the demo ({trained['operator']}, seed {trained['seed']}, test accuracy "
        f"{trained['test_accuracy']:.3f}); its filters' responses beside the regimes' true ones:",
        "",
        "![frequency responses](frequency_responses.png)",
        "",
        "### Stability under graph perturbation",
        "",
        "| mode | edges perturbed | test acc (mean) | min | max |",
        "| --- | ---: | ---: | ---: | ---: |",
    ]
    lines += [
        f"| {row['mode']} | {row['fraction']:.0%} | {row['mean']:.3f} | {row['min']:.3f} | {row['max']:.3f} |"
        for row in analyses["perturbation"]
    ]
    lines += ["", "![perturbation](perturbation.png)", "", "### Transfer across sizes", "",
              "| nodes | test acc |", "| ---: | ---: |"]
    lines += [f"| {row['nodes']} | {row['test_accuracy']:.3f} |" for row in analyses["transfer"]]
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
    """Check every claim, run the analyses, write ``claims.json`` (``claims`` and ``analyses``),
    ``claims.md`` and the plots into ``out``; return the claims as text. ``demo`` defaults to the
    demo scenario at its defaults."""
    demo = demo if demo is not None else sensor_regimes()
    checked = evaluate(paths, seeds, demo)
    analyses = learned_filters(out, demo, epochs)
    content = {"claims": [claim.as_dict() for claim in checked], "analyses": analyses}
    write_atomic(out / "claims.json", json.dumps(content, indent=2, default=float) + "\n")
    text = format_claims(checked)
    write_atomic(out / "claims.md", "# Claims\n\n" + text + "\n" + format_analyses(analyses))
    return text + "\n" + format_analyses(analyses)
