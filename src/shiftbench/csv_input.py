"""Reading a user's CSV file, with every failure as one line."""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path

import pandas as pd

from shiftbench.errors import ConfigError


def read_user_csv(path: Path, fail: Callable[[Path, str], ConfigError], empty_hint: str) -> pd.DataFrame:
    """``pandas.read_csv(path)``; an empty or unreadable file raises ``fail(path, problem)``, where
    ``empty_hint`` says what the file should hold."""
    try:
        return pd.read_csv(path)
    except pd.errors.EmptyDataError:
        raise fail(path, f"is empty; {empty_hint}") from None
    except UnicodeDecodeError as error:
        raise fail(path, f"is not UTF-8 text (byte {error.object[error.start]:#04x} at offset {error.start}); "
                   "save it as UTF-8") from None
    except (OSError, pd.errors.ParserError) as error:
        raise fail(path, f"cannot be read as CSV ({str(error).splitlines()[0]})") from None
