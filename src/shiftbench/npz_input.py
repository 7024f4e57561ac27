"""A user's ``.npz`` archive measured before it is read: what each member would occupy in
memory, from the zip directory (uncompressed sizes) and the arrays' own headers (shape and
dtype), so that a small file that inflates to gigabytes, or a header that declares petabytes,
is refused before numpy allocates anything."""

from __future__ import annotations

import math
import zipfile
from collections.abc import Callable
from pathlib import Path

from numpy.lib import format as npy_format

from shiftbench.errors import ConfigError
from shiftbench.runtime import available_memory_bytes


def declared_bytes(archive: zipfile.ZipFile, info: zipfile.ZipInfo) -> int:
    """The larger of a member's uncompressed size and the bytes its array header declares
    (``prod(shape) * itemsize``); a header numpy cannot read counts as its uncompressed size
    (numpy's own loader then says what is wrong with it)."""
    try:
        with archive.open(info) as member:
            version = npy_format.read_magic(member)
            read_header = npy_format.read_array_header_1_0 if version == (1, 0) else npy_format.read_array_header_2_0
            shape, _, dtype = read_header(member)
    except (ValueError, OSError, EOFError, zipfile.BadZipFile):
        return info.file_size
    return max(info.file_size, math.prod(shape) * dtype.itemsize)


def require_fits_in_memory(path: Path, fail: Callable[[Path, str], ConfigError]) -> None:
    """Refuse ``path`` (a zip archive) when reading it would take more than the memory
    available now: one line naming the largest member, its size and the memory at hand."""
    available = available_memory_bytes()
    try:
        with zipfile.ZipFile(path) as archive:
            sizes = {info.filename: declared_bytes(archive, info) for info in archive.infolist()}
    except (OSError, zipfile.BadZipFile, EOFError):
        return  # not a readable archive: the loader says so in its own words
    total = sum(sizes.values())
    if total > available:
        largest = max(sizes, key=sizes.get)
        raise fail(path, f"would take {total / 1e9:,.1f} GB of memory to read ({largest!r} alone "
                   f"{sizes[largest] / 1e9:,.1f} GB), but {available / 1e9:,.1f} GB is available; accepted: "
                   "arrays that fit in memory")
