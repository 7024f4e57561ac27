"""Timing, peak memory, and the machine's limits, measured the same way for every implementation."""

from __future__ import annotations

import contextlib
import ctypes
import ctypes.util
import statistics
import subprocess
import sys
import time
from collections.abc import Callable, Iterator
from pathlib import Path

import torch

from shiftbench.records import write_atomic

MIN_REPEATS = 3
MAX_REPEATS = 15
# Repeat a fast case until this much time is spent, so its median is stable.
TIME_PER_MEASUREMENT_S = 1.0


def median_ms(run: Callable[[], None]) -> float:
    """Median wall time of ``run`` in milliseconds, after one warm-up call: at least
    ``MIN_REPEATS`` calls, more until ``TIME_PER_MEASUREMENT_S`` is spent."""
    run()
    times: list[float] = []
    while len(times) < MIN_REPEATS or (sum(times) < TIME_PER_MEASUREMENT_S and len(times) < MAX_REPEATS):
        started = time.perf_counter()
        run()
        times.append(time.perf_counter() - started)
    return 1000 * statistics.median(times)


def reset_peak_rss() -> None:
    """Hand freed heap memory back to the system, then restart the kernel's peak-RSS count
    (``/proc/self/clear_refs``, Linux 4.0 and later), so the next peak is the next run's own."""
    name = ctypes.util.find_library("c")
    if name is not None:
        ctypes.CDLL(name).malloc_trim(0)
    try:
        Path("/proc/self/clear_refs").write_text("5")
    except OSError:
        pass


def peak_rss_mb() -> float:
    """The process's peak resident set since the last :func:`reset_peak_rss`, in MiB."""
    for line in Path("/proc/self/status").read_text().splitlines():
        if line.startswith("VmHWM:"):
            return int(line.split()[1]) / 1024
    import resource

    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024


def copy_bandwidth_gbps(megabytes: int = 512) -> float:
    """Bytes read plus bytes written per second by ``Tensor.copy_`` between two large buffers."""
    source = torch.ones(megabytes * 2**20 // 4)
    target = torch.empty_like(source)
    milliseconds = median_ms(lambda: target.copy_(source))
    return 2 * source.numel() * 4 / (milliseconds / 1000) / 1e9


def matmul_gflops(size: int = 2048) -> float:
    """Dense float32 matrix-product rate, ``2 n^3`` operations a product."""
    left, right = torch.randn(size, size), torch.randn(size, size)
    out = torch.empty(size, size)
    milliseconds = median_ms(lambda: torch.mm(left, right, out=out))
    return 2 * size**3 / (milliseconds / 1000) / 1e9


def traffic_bytes(nodes: int, batch: int, channels: int, order: int, edges: int, pass_: str) -> int:
    """The least data a polynomial filter must move, assuming perfect caching: read ``X`` and
    write ``Y`` once, and in each of the ``K`` sparse products read its operand and write its
    result once and read the operator (8-byte column index and 4-byte weight an edge). The
    backward pass moves as much again, plus reading ``X`` once more for the taps' gradient."""
    signal = 4 * nodes * batch * channels
    forward = 2 * signal + order * (2 * signal + 12 * edges)
    return forward if pass_ == "forward" else 2 * forward + signal


def arithmetic_flops(nodes: int, batch: int, channels: int, order: int, edges: int, pass_: str) -> int:
    """The floating-point operations of a polynomial filter with square taps: ``K`` sparse
    products (``2 E B F`` each: a multiply and an add an edge and value) and ``K + 1`` tap
    products (``2 N B F^2`` each). The backward pass does both again twice (the input's
    gradient through ``S^T`` and the taps', ``X^T Z_k``)."""
    forward = order * 2 * edges * batch * channels + (order + 1) * 2 * nodes * batch * channels * channels
    return forward if pass_ == "forward" else 3 * forward


# Other work on a shared machine: one process multiplying matrices on one thread.
COMPETITOR = (
    "import torch\n"
    "torch.set_num_threads(1)\n"
    "a = torch.randn(512, 512)\n"
    "while True:\n"
    "    a = torch.tanh(a @ a)\n"
)


@contextlib.contextmanager
def busy_competitor(busy: bool = True) -> Iterator[None]:
    """Run :data:`COMPETITOR` in a process of its own for the ``with`` block (nothing when not
    ``busy``)."""
    competitor = subprocess.Popen([sys.executable, "-c", COMPETITOR]) if busy else None
    try:
        yield
    finally:
        if competitor is not None:
            competitor.kill()
            competitor.wait()


def write_markdown_table(path: Path, title: str, intro: str, columns: dict[str, str], rows: list[list[str]]) -> None:
    """A benchmark's ``.md``: ``# title``, the ``intro`` paragraph, and a table of ``rows`` under
    ``columns`` (each name with its alignment, ``---`` or ``---:``); printed as well."""
    lines = [f"# {title}", "", intro, "", "| " + " | ".join(columns) + " |", "| " + " | ".join(columns.values()) + " |"]
    lines += ["| " + " | ".join(row) + " |" for row in rows]
    write_atomic(path, "\n".join(lines) + "\n")
    print("\n".join(lines))
