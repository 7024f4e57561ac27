"""The benchmark's Markdown table: every case side by side, the targets' ratios on top."""

from __future__ import annotations

from pathlib import Path

from shiftbench.records import write_atomic

CONVOLUTIONS = ("conv1d", "conv2d_channels_last")
COLUMNS = ("shiftbench", "conv1d", "conv2d_channels_last", "tagconv", "dense")
# The targets: (label, graph, nodes, batch, order, pass, kind, limit).
TARGETS = (
    ("graph_conv on the directed line graph, forward+backward, N=1024, B=256, F=16, K=4: at most 1.3x the "
     "fastest torch convolution", "line", 1024, 256, 4, "forward_backward", "vs_conv", 1.3),
    ("graph_conv on the k-NN graph, forward+backward, N=1024, B=256, F=16, K=4: at least 15x faster than "
     "TAGConv on disjoint copies", "knn", 1024, 256, 4, "forward_backward", "tagconv_speedup", 15.0),
    ("graph_conv forward on the k-NN graph, N=16384, B=256, F=16, K=4: within 4x of the memory-traffic "
     "bound", "knn", 16384, 256, 4, "forward", "vs_bound", 4.0),
    ("graph_conv forward on the k-NN graph, N=16384, B=256, F=16, K=4: within 3x of the combined bound "
     "(the larger of the traffic and the arithmetic bound)", "knn", 16384, 256, 4, "forward", "vs_combined", 3.0),
)


def _cases(rows: list[dict]) -> dict[tuple, dict[str, dict]]:
    cases: dict[tuple, dict[str, dict]] = {}
    for row in rows:
        key = (row["graph"], row["nodes"], row["batch"], row["order"], row["pass"])
        cases.setdefault(key, {})[row["implementation"]] = row
    return cases


def bounds_ms(row: dict, limits: dict) -> tuple[float, float]:
    """The case's memory-traffic bound (its bytes at the measured copy bandwidth) and its
    combined bound: the larger of that and the arithmetic bound (its FLOPs at the measured
    matmul rate), in ms."""
    traffic = row["bound_bytes"] / (limits["copy_bandwidth_gbps"] * 1e9) * 1000
    arithmetic = row["bound_flops"] / (limits["matmul_gflops"] * 1e9) * 1000
    return traffic, max(traffic, arithmetic)


def ratios(by_implementation: dict[str, dict], bound_ms: float, combined_ms: float) -> dict[str, float | None]:
    """shiftbench against the fastest convolution, TAGConv's time over shiftbench's, and
    shiftbench against the memory-traffic and combined bounds (None where a side was not
    measured)."""
    times = {name: row["median_ms"] for name, row in by_implementation.items() if "median_ms" in row}
    ours = times.get("shiftbench")
    convolutions = [times[name] for name in CONVOLUTIONS if name in times]
    return {
        "vs_conv": ours / min(convolutions) if ours and convolutions else None,
        "tagconv_speedup": times["tagconv"] / ours if ours and "tagconv" in times else None,
        "vs_bound": ours / bound_ms if ours else None,
        "vs_combined": ours / combined_ms if ours else None,
    }


def _cell(value: float | None, digits: int = 1, suffix: str = "") -> str:
    return "–" if value is None else f"{value:,.{digits}f}{suffix}"


def write_layers_report(rows: list[dict], limits: dict, path: Path) -> None:
    bandwidth = limits["copy_bandwidth_gbps"]
    cases = _cases(rows)
    lines = [
        "# Graph-filter layer benchmark",
        "",
        f"Measured {limits['date']} on {limits['cpu']}, {limits['cores']} cores, torch {limits['torch']}, by "
        f"`make bench` (`python -m benchmarks.layers`, {limits['wall_seconds'] / 60:.0f} min). Machine limits "
        f"in the same run: copy bandwidth {bandwidth:.1f} GB/s (bytes read + written), dense float32 matmul "
        f"{limits['matmul_gflops']:.0f} GFLOP/s. The memory-traffic bound of a case is the least data the "
        "layer must move (see `benchmarks/measure.py`) at that copy bandwidth; its arithmetic bound, the "
        "layer's floating-point operations at that matmul rate; the combined bound, the larger of the two.",
        "",
        "## Targets",
        "",
        "| target | measured | met |",
        "|---|---|---|",
    ]
    for label, *key, kind, limit in TARGETS:
        found = cases.get(tuple(key))
        if not found or "median_ms" not in found.get("shiftbench", {}):
            lines.append(f"| {label} | not measured in this run | – |")
            continue
        value = ratios(found, *bounds_ms(found["shiftbench"], limits))[kind]
        if value is None:
            lines.append(f"| {label} | not measured in this run | – |")
            continue
        met = value >= limit if kind == "tagconv_speedup" else value <= limit
        lines.append(f"| {label} | {value:.2f}x | {'yes' if met else 'no'} |")
    lines += [
        "",
        "## Every case",
        "",
        "Medians in ms. `vs conv`: shiftbench's time over the fastest torch convolution; `TAGConv / ours`: "
        "how many times faster shiftbench is than TAGConv; `vs bound`: shiftbench's time over the "
        "memory-traffic bound; `vs combined`: over the combined bound. `RSS`: shiftbench's peak resident memory in MiB (the whole process, "
        "torch included). `–`: not run (reasons below the table).",
        "",
        "| graph | nodes | batch | order | pass | " + " | ".join(COLUMNS) + " | bound | combined | vs conv | TAGConv / ours | vs bound | vs combined | RSS |",
        "|" + "---|" * (5 + len(COLUMNS) + 7),
    ]
    reasons: dict[str, str] = {}
    worst_difference = 0.0
    for (graph, nodes, batch, order, pass_), found in sorted(cases.items()):
        bound_ms, combined_ms = bounds_ms(found["shiftbench"], limits)
        cells = []
        for name in COLUMNS:
            row = found.get(name, {})
            if "skipped" in row:
                reasons[f"{name}: {row['skipped']}"] = ""
            worst_difference = max(worst_difference, row.get("relative_difference_to_shiftbench", 0.0))
            cells.append(_cell(row.get("median_ms")))
        measured = ratios(found, bound_ms, combined_ms)
        lines.append(
            f"| {graph} | {nodes} | {batch} | {order} | {pass_} | " + " | ".join(cells)
            + f" | {bound_ms:.1f} | {combined_ms:.1f} | {_cell(measured['vs_conv'], 2, 'x')}"
            + f" | {_cell(measured['tagconv_speedup'], 1, 'x')} | {_cell(measured['vs_bound'], 1, 'x')}"
            + f" | {_cell(measured['vs_combined'], 1, 'x')} | {_cell(found['shiftbench'].get('peak_rss_mb'), 0)} |"
        )
    lines += ["", "Not run: " + "; ".join(sorted(reasons)) + "." if reasons else "",
              "", f"Every implementation's output agreed with shiftbench's to a relative {worst_difference:.1e} "
              "(largest difference over the largest value).", ""]
    write_atomic(path, "\n".join(lines))
