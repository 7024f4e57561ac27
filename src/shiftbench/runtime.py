"""Facts and settings of the processes shiftbench runs in: the cores and memory at hand, the C
allocator's treatment of large blocks, and whether a process of this host still runs."""

from __future__ import annotations

import ctypes
import ctypes.util
import os
from pathlib import Path


# glibc mallopt parameters (malloc.h).
M_TRIM_THRESHOLD = -1
M_MMAP_MAX = -4
# Keep up to this much freed memory in the heap rather than returning it to the system.
TRIM_THRESHOLD_BYTES = 1 << 30


def keep_freed_memory() -> bool:
    """Serve large tensors from the heap and keep freed memory for reuse (glibc only).

    glibc hands each block over 128 KiB to its own ``mmap`` and unmaps it on free, so every
    training step faults in its activations afresh; measured here, a tensor copy ran at 5 GB/s
    that way and 25 GB/s from reused memory, and a Conv2d step 1.5x faster. Returns whether the
    setting took effect (False on a C library without ``mallopt``).
    """
    name = ctypes.util.find_library("c")
    if name is None:
        return False
    try:
        libc = ctypes.CDLL(name)
        mallopt = libc.mallopt
    except (OSError, AttributeError):
        return False
    return bool(mallopt(M_MMAP_MAX, 0)) and bool(mallopt(M_TRIM_THRESHOLD, TRIM_THRESHOLD_BYTES))


def available_cores() -> int:
    """Cores this process may run on (its affinity mask where the system has one)."""
    if hasattr(os, "sched_getaffinity"):
        return len(os.sched_getaffinity(0))
    return os.cpu_count() or 1


def available_memory_bytes() -> int:
    """Memory the system can give this process now: ``MemAvailable`` from ``/proc/meminfo``
    where there is one, else the physical memory."""
    try:
        for line in Path("/proc/meminfo").read_text().splitlines():
            if line.startswith("MemAvailable:"):
                return int(line.split()[1]) * 1024
    except OSError:
        pass
    return os.sysconf("SC_PAGE_SIZE") * os.sysconf("SC_PHYS_PAGES")


def process_alive(pid: int) -> bool:
    """Whether process ``pid`` of this host still runs (one that is not ours to signal does)."""
    try:
        os.kill(pid, 0)
    except (ProcessLookupError, ValueError, OverflowError):
        return False
    except PermissionError:
        return True
    return True


def process_start(pid: int) -> int | None:
    """When process ``pid`` of this host started, in clock ticks since boot (field 22 of
    ``/proc/PID/stat``, proc(5)): with the pid, it names one process, since pids are reused. None
    where there is no such entry (the process is gone, or the system has no ``/proc``)."""
    try:
        text = Path(f"/proc/{pid}/stat").read_text()
    except OSError:
        return None
    # The command name (field 2, in parentheses) may hold spaces; the fields after it are plain.
    return int(text.rsplit(")", 1)[1].split()[19])


def start_peak_memory() -> str:
    """Make the process's peak resident memory start afresh, so the next reading is one job's
    peak: free heap memory kept from earlier jobs is handed back (glibc ``malloc_trim``), then
    the kernel's high-water mark is reset to the current resident size (writing 5 to
    ``/proc/self/clear_refs``, Linux 4.0+). Returns ``"job"`` where the reset took effect, else
    ``"process"`` (the reading is the process's high-water mark, which may be an earlier job's)."""
    name = ctypes.util.find_library("c")
    if name is not None:
        try:
            ctypes.CDLL(name).malloc_trim(0)
        except (OSError, AttributeError):
            pass
    try:
        Path("/proc/self/clear_refs").write_text("5")
    except OSError:
        return "process"
    return "job"


def peak_memory_mb() -> float:
    """The peak resident memory in MiB since :func:`start_peak_memory` (``VmHWM``), or the
    process's high-water mark where ``/proc`` has no status."""
    try:
        for line in Path("/proc/self/status").read_text().splitlines():
            if line.startswith("VmHWM:"):
                return int(line.split()[1]) / 1024
    except OSError:
        pass
    import resource

    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024


_interrupted = False


def catch_interrupts() -> None:
    """Ctrl-C as a KeyboardInterrupt that is also remembered: CPython swallows an exception
    raised while a finalizer (``__del__``, a weakref callback) runs, so the interrupt could be
    lost; :func:`raise_if_interrupted` at each epoch and each job raises it again. Only where
    SIGINT is at Python's default (a worker that ignores it stays ignoring)."""
    import signal

    def interrupted(signum: int, frame: object) -> None:
        global _interrupted
        _interrupted = True
        raise KeyboardInterrupt

    if signal.getsignal(signal.SIGINT) is signal.default_int_handler:
        signal.signal(signal.SIGINT, interrupted)


def raise_if_interrupted() -> None:
    """Raise KeyboardInterrupt when Ctrl-C came and its first raise was swallowed."""
    if _interrupted:
        raise KeyboardInterrupt
