"""The user-facing error: bad config values and bad input files."""

from pathlib import Path


class ConfigError(ValueError):
    """A user's config or input file is invalid; the message is one line, ready to print, that
    names the bad value and what is accepted."""


def file_error(key: str, path: Path, problem: str) -> ConfigError:
    """The one-line refusal of a user's file given as ``key``: ``key='path': problem``."""
    return ConfigError(f"{key}={str(path)!r}: {problem}")
