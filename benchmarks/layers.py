"""Benchmark of the graph-filter layer against torch's convolutions, PyG's TAGConv and a dense
product, with the machine's limits measured in the same run.

``python -m benchmarks.layers`` runs every case and writes ``results/benchmarks/layers.json``
and ``layers.md``. Each (graph, nodes, batch) group runs in a process of its own, and within it
every implementation's peak memory is counted from a fresh start. Options narrow the grid
(``--nodes 1024 --batches 32``) for a quick look.
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import subprocess
import sys
import time
from datetime import datetime, timezone
from pathlib import Path

import torch

from benchmarks.implementations import GRAPHS, IMPLEMENTATIONS, Case, applicable, build, make_graph
from benchmarks.measure import (
    copy_bandwidth_gbps, matmul_gflops, median_ms, peak_rss_mb, reset_peak_rss, traffic_bytes, arithmetic_flops,
)
from benchmarks.report import write_layers_report
from shiftbench.graphs.operators import shift_operator
from shiftbench.records import write_atomic
from shiftbench.runtime import available_cores, keep_freed_memory

NODES = (1024, 16384)
BATCHES = (32, 256)
CHANNELS = 16
ORDERS = (2, 4, 8)
PASSES = ("forward", "forward_backward")
RESULT_KEYS = ("graph", "nodes", "batch", "channels", "order", "pass", "implementation", "median_ms", "peak_rss_mb")


def canonical(output: torch.Tensor, implementation: str, case: Case) -> torch.Tensor:
    """An implementation's output in the layer's own layout ``(batch, nodes, channels)``."""
    if implementation == "tagconv":  # (batch * nodes, channels)
        return output.view(case.batch, case.nodes, case.channels)
    if implementation == "conv2d_channels_last":  # (batch, channels, 1, nodes)
        return output.squeeze(2).transpose(1, 2)
    if implementation == "conv1d":  # (batch, channels, nodes)
        return output.transpose(1, 2)
    return output


def timed_pass(run, signal: torch.Tensor, module, pass_: str):
    """A no-argument callable doing one ``forward`` (no autograd) or ``forward_backward``."""
    if pass_ == "forward":
        def forward() -> None:
            with torch.no_grad():
                run()
        return forward
    signal.requires_grad_(True)
    with torch.no_grad():
        upstream = torch.randn_like(run())

    def forward_backward() -> None:
        signal.grad = None
        if module is not None:
            module.zero_grad(set_to_none=True)
        run().backward(upstream)
    return forward_backward


def measure_group(graph_name: str, nodes: int, batch: int, orders: tuple[int, ...]) -> list[dict]:
    """Every order, pass and implementation of one (graph, nodes, batch) group, in this process."""
    keep_freed_memory()
    torch.set_num_threads(available_cores())
    graph = make_graph(graph_name, nodes)
    shift = shift_operator(graph)
    edges = shift._nnz()
    rows = []
    for order in orders:
        for pass_ in PASSES:
            case = Case(graph_name, graph.nodes, batch, CHANNELS, order, pass_)
            reference = None
            for implementation in IMPLEMENTATIONS:
                row = {**case.key(), "implementation": implementation, "edges": edges,
                       "bound_bytes": traffic_bytes(case.nodes, batch, CHANNELS, order, edges, pass_),
                       "bound_flops": arithmetic_flops(case.nodes, batch, CHANNELS, order, edges, pass_)}
                reason = applicable(case, implementation, edges)
                if reason is not None:
                    rows.append({**row, "skipped": reason})
                    continue
                reset_peak_rss()
                run, signal, module = build(case, implementation, shift)
                with torch.no_grad():
                    output = canonical(run(), implementation, case)
                if reference is None:
                    reference = output
                difference = float((output - reference).abs().max() / reference.abs().max())
                del output
                row["median_ms"] = median_ms(timed_pass(run, signal, module, pass_))
                row["peak_rss_mb"] = peak_rss_mb()
                row["relative_difference_to_shiftbench"] = difference
                rows.append(row)
                del run, signal, module
    return rows


def machine() -> dict:
    """The limits measured now, and what the machine is."""
    keep_freed_memory()
    torch.set_num_threads(available_cores())
    cpuinfo = Path("/proc/cpuinfo")
    names = [line.split(":", 1)[1].strip() for line in cpuinfo.read_text().splitlines()
             if line.startswith("model name")] if cpuinfo.exists() else []
    model = names[0] if names else platform.processor()
    return {
        "date": datetime.now(timezone.utc).strftime("%Y-%m-%d"),
        "cpu": model,
        "cores": available_cores(),
        "torch": torch.__version__,
        "python": platform.python_version(),
        "copy_bandwidth_gbps": copy_bandwidth_gbps(),
        "matmul_gflops": matmul_gflops(),
    }


def in_subprocess(arguments: list[str], environment: dict[str, str] | None = None, inherit: bool = True) -> list[dict]:
    """Run this module with ``arguments`` in a fresh process and read the JSON lines it prints;
    ``environment`` is added to this process's (``inherit``) or replaces it."""
    done = subprocess.run([sys.executable, "-m", "benchmarks.layers", *arguments], capture_output=True, text=True,
                          env={**(os.environ if inherit else {}), **(environment or {})})
    if done.returncode != 0:
        raise SystemExit(f"benchmark worker {' '.join(arguments)} failed:\n{done.stderr}")
    return [json.loads(line) for line in done.stdout.splitlines() if line.startswith("{")]


def write_results(rows: list[dict], limits: dict, out_dir: Path) -> None:
    """``layers.json`` (the measured entries, with exactly ``RESULT_KEYS``) and ``layers.md``."""
    out_dir.mkdir(parents=True, exist_ok=True)
    measured = [{key: row[key] for key in RESULT_KEYS} for row in rows if "median_ms" in row]
    write_atomic(out_dir / "layers.json", json.dumps(measured, indent=1) + "\n")
    write_layers_report(rows, limits, out_dir / "layers.md")


def run_all(graphs, nodes_list, batches, orders, out_dir: Path) -> None:
    started = time.perf_counter()
    limits = in_subprocess(["--limits"])[0]
    print(f"machine: {limits['cpu']}, {limits['cores']} cores; copy {limits['copy_bandwidth_gbps']:.1f} GB/s, "
          f"matmul {limits['matmul_gflops']:.0f} GFLOP/s", file=sys.stderr, flush=True)
    groups = [(g, n, b) for g in graphs for n in nodes_list for b in batches]
    rows: list[dict] = []
    for index, (graph_name, nodes, batch) in enumerate(groups, start=1):
        group_started = time.perf_counter()
        print(f"[{index}/{len(groups)}] {graph_name}, {nodes} nodes, batch {batch} ...", end="", file=sys.stderr, flush=True)
        rows += in_subprocess(["--group", graph_name, str(nodes), str(batch), "--orders", *map(str, orders)])
        print(f" {time.perf_counter() - group_started:.0f} s", file=sys.stderr, flush=True)
    limits["wall_seconds"] = time.perf_counter() - started
    write_results(rows, limits, out_dir)
    print(f"wrote {out_dir / 'layers.json'} and {out_dir / 'layers.md'} in {limits['wall_seconds']:.0f} s", file=sys.stderr)


def main(argv: list[str] | None = None) -> None:
    parser = argparse.ArgumentParser(prog="python -m benchmarks.layers", description=__doc__.splitlines()[0])
    parser.add_argument("--graphs", nargs="+", default=list(GRAPHS), choices=GRAPHS)
    parser.add_argument("--nodes", nargs="+", type=int, default=list(NODES))
    parser.add_argument("--batches", nargs="+", type=int, default=list(BATCHES))
    parser.add_argument("--orders", nargs="+", type=int, default=list(ORDERS))
    parser.add_argument("--out", type=Path, default=Path("results/benchmarks"))
    parser.add_argument("--group", nargs=3, metavar=("GRAPH", "NODES", "BATCH"), help=argparse.SUPPRESS)
    parser.add_argument("--limits", action="store_true", help=argparse.SUPPRESS)
    arguments = parser.parse_args(argv)
    if arguments.limits:
        print(json.dumps(machine()))
    elif arguments.group:
        graph_name, nodes, batch = arguments.group
        for row in measure_group(graph_name, int(nodes), int(batch), tuple(arguments.orders)):
            print(json.dumps(row), flush=True)
    else:
        run_all(arguments.graphs, arguments.nodes, arguments.batches, arguments.orders, arguments.out)


if __name__ == "__main__":
    main()
