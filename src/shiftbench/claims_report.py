"""Evaluate every claim and write ``claims.json`` and ``claims.md``."""

from __future__ import annotations

import json
from collections.abc import Iterable
from pathlib import Path

from shiftbench import claims
from shiftbench.data import sensor_regimes
from shiftbench.records import load_records, write_atomic


def evaluate(paths: Iterable[Path], seeds: tuple[int, ...] = (0, 1, 2)) -> list[claims.Claim]:
    """The claims in a stable order: computed ones on the demo scenario, the rest from the records
    under ``paths``."""
    records = load_records(list(paths))
    demo = sensor_regimes()
    return [
        claims.line_graph_equivalence(demo, seeds),
        claims.undirected_path_symmetry(),
        claims.parameters_vs_nodes(records),
        claims.accuracy_vs_nodes(records),
        claims.permutation_equivariance(demo),
        claims.graph_matters(records),
    ]


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


def write_claims(paths: Iterable[Path], out: Path, seeds: tuple[int, ...] = (0, 1, 2)) -> str:
    checked = evaluate(paths, seeds)
    write_atomic(out / "claims.json", json.dumps([claim.as_dict() for claim in checked], indent=2) + "\n")
    text = format_claims(checked)
    write_atomic(out / "claims.md", "# Claims\n\n" + text)
    return text
