"""Reading a user's CSV file, with every failure as one line."""

from __future__ import annotations

from typing import TYPE_CHECKING

import csv
from collections.abc import Callable
from pathlib import Path


from shiftbench.errors import ConfigError

if TYPE_CHECKING:
    import pandas as pd


def read_user_csv(
    path: Path, fail: Callable[[Path, str], ConfigError], empty_hint: str, text_columns: tuple[str, ...] = ()
) -> pd.DataFrame:
    """``pandas.read_csv(path)``, ``text_columns`` read as text (exactly as written); an empty or
    unreadable file, a column name given twice, or a column without a name (a row index written
    by pandas' ``to_csv``) raises ``fail(path, problem)``, where ``empty_hint`` says what the file
    should hold."""
    import pandas as pd

    try:
        table = pd.read_csv(path, dtype={column: str for column in text_columns})
    except pd.errors.EmptyDataError:
        raise fail(path, f"is empty; {empty_hint}") from None
    except UnicodeDecodeError as error:
        raise fail(path, f"is not UTF-8 text (byte {error.object[error.start]:#04x} at offset {error.start}); "
                   "save it as UTF-8") from None
    except (OSError, pd.errors.ParserError) as error:
        raise fail(path, f"cannot be read as CSV ({str(error).splitlines()[0]})") from None
    check_header(path, fail)
    return table


def check_header(path: Path, fail: Callable[[Path, str], ConfigError]) -> None:
    """Refuse a header that pandas would silently rename: a name given twice (``label`` and a
    second ``label`` that would become a node), or an empty one (``Unnamed: 0``, a saved index)."""
    with open(path, newline="", encoding="utf-8") as handle:
        header = [name.strip() for name in next(csv.reader(handle), [])]
    seen: dict[str, int] = {}
    for position, name in enumerate(header, start=1):
        if not name:
            raise fail(path, f"column {position} has no name (a row index saved by pandas' to_csv?); "
                       "save with index=False, or name every column")
        if name in seen:
            raise fail(path, f"has column {name!r} twice (columns {seen[name]} and {position}); "
                       "give every column its own name")
        seen[name] = position
