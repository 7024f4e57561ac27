"""The files a job reads, by content. Config fields declared with
:func:`shiftbench.config.input_file` (``data.path``, ``data.graph``, ``graph.path``) name files;
a digest of each named file's bytes joins the job's config under ``inputs``, so the config hash
changes when a file does (a file overwritten, or another file under the same relative path),
and a changed file never reuses an old record."""

from __future__ import annotations

import hashlib
from dataclasses import fields
from pathlib import Path
from typing import Any

from shiftbench.config import RunConfig, as_plain_dict

# Files hashed in this process, by (resolved path, size, modification time in ns): a study
# launching hundreds of jobs on one file reads it once.
_DIGESTS: dict[tuple[str, int, int], str] = {}
CHUNK_BYTES = 2**20


def file_digest(path: Path) -> str:
    """``sha256:`` and the first 16 hex digits of the SHA-256 of the file's bytes."""
    status = path.stat()
    key = (str(path.resolve()), status.st_size, status.st_mtime_ns)
    if key not in _DIGESTS:
        digest = hashlib.sha256()
        with path.open("rb") as stream:
            while chunk := stream.read(CHUNK_BYTES):
                digest.update(chunk)
        _DIGESTS[key] = "sha256:" + digest.hexdigest()[:16]
    return _DIGESTS[key]


def input_digests(run: RunConfig) -> dict[str, str]:
    """``{"data.path": "sha256:...", ...}`` for every file the run's config names. A named path
    that is not a readable file is left out: the loader refuses it with its own message."""
    digests = {}
    for group in ("data", "graph"):
        schema = getattr(run, group)
        for item in fields(schema):
            name = getattr(schema, item.name)
            if item.metadata.get("reads_file") and name:
                path = Path(name).expanduser()
                try:
                    digests[f"{group}.{item.name}"] = file_digest(path)
                except OSError:
                    continue
    return digests


def job_content(run: RunConfig) -> dict[str, Any]:
    """The validated config as plain data, with the digests of its input files under
    ``inputs`` where it names any (configs that read no file keep the hash they had)."""
    plain = as_plain_dict(run)
    digests = input_digests(run)
    if digests:
        plain["inputs"] = digests
    return plain
