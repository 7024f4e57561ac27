"""Real regional data with its real graph, read offline from the files libpysal's wheel ships
(extra ``regions``):

- ``state_incomes``: per-capita income of the 48 contiguous US states, every year 1929-2009
  (``us_income/usjoin.csv``), on the states' contiguity graph (``us_income/states48.gal``). A
  forecast on every node: from each state's income growth (the difference of log incomes) over
  the last ``window`` years, every state's growth the next year. The samples are the years in
  order; the split is in time order too (train, then validation, then test years), so no year
  after a test year is trained on.

The Mexican states' decennial incomes (``mexico``, 1940-2000) give six growth values a state:
too few forecasting samples for a train, validation and test part, so they are not offered.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from shiftbench.config import FRACTION, at_least, declared, require
from shiftbench.data.dataset import DataConfig, Dataset, Splits, keyword_loader
from shiftbench.errors import ConfigError
from shiftbench.graphs.graph import Graph
from shiftbench.registry import DATASETS, DatasetSource

FIRST_YEAR, LAST_YEAR = 1929, 2009


def shipped_folder(name: str) -> Path:
    """The folder of libpysal's shipped example ``name``; a one-line error naming the extra
    when libpysal is not installed."""
    try:
        import libpysal
    except ImportError:
        raise ConfigError("data=state_incomes needs the regions extra (libpysal, whose wheel ships the data): "
                          "pip install -e '.[regions]'") from None
    return Path(libpysal.__file__).parent / "examples" / name


def read_gal(path: Path, names: list[str]) -> Graph:
    """The contiguity graph of a GAL file (libpysal's reader), nodes in the order of ``names``
    (the GAL file's ids 0..n-1 number the rows of the data file)."""
    import libpysal
    import scipy.sparse as sp

    weights = libpysal.io.open(str(path)).read()
    order = sorted(weights.neighbors, key=int)
    if len(order) != len(names):
        raise ConfigError(f"{path}: holds {len(order)} regions but the data has {len(names)}; the shipped files disagree")
    rows, columns = zip(*((int(region), int(neighbour)) for region in order for neighbour in weights.neighbors[region]))
    matrix = sp.csr_matrix((np.ones(len(rows)), (columns, rows)), shape=(len(names), len(names)))
    return Graph.from_adjacency(matrix, name=path.name)


def state_incomes(window: int = 3, val_fraction: float = 0.2, test_fraction: float = 0.2, seed: int = 0) -> Dataset:
    """Signals ``(years, 48, window)``: each state's growth of log income over the ``window``
    years up to year ``t`` (oldest first); targets ``(years, 48, 1)``: its growth from ``t`` to
    ``t + 1``. Years in order; the last ``test_fraction`` of them test, the ``val_fraction``
    before them validate, the rest train. ``seed`` is unused (nothing is drawn)."""
    import pandas as pd

    folder = shipped_folder("us_income")
    table = pd.read_csv(folder / "usjoin.csv")
    years = [str(year) for year in range(FIRST_YEAR, LAST_YEAR + 1)]
    income = table[years].to_numpy(dtype=np.float64).T  # (years, states)
    growth = np.diff(np.log(income), axis=0)  # (years - 1, states): growth into each year
    starts = range(len(growth) - window)
    signals = np.stack([growth[start:start + window].T for start in starts]).astype(np.float32)  # (samples, states, window)
    targets = np.stack([growth[start + window][:, None] for start in starts]).astype(np.float32)  # (samples, states, 1)
    samples = len(signals)
    test, val = int(round(test_fraction * samples)), int(round(val_fraction * samples))
    order = np.arange(samples)
    splits = Splits(train=order[: samples - test - val], val=order[samples - test - val: samples - test],
                    test=order[samples - test:])
    return Dataset(signals=signals, labels=targets, splits=splits, classes=1,
                   native_graph=read_gal(folder / "states48.gal", table["Name"].tolist()),
                   name="state_incomes", in_time_order=True)


@dataclass
class StateIncomesConfig(DataConfig):
    """The US states' income growth forecast: ``window`` past years a sample, years in order."""

    source: str = "state_incomes"
    window: int = declared(at_least(1), 3)
    test_fraction: float = declared(FRACTION, 0.2)

    def check(self) -> None:
        super().check()
        require("window", self.window, self.window <= 40, "an integer from 1 to 40 (the years leave 80 growth values)")
        require("test_fraction", self.test_fraction, 0 < self.test_fraction and self.val_fraction + self.test_fraction < 1,
                f"a fraction in (0, {1.0 - self.val_fraction:g}) (val_fraction + test_fraction < 1)")

    def known_nodes(self) -> int | None:
        return 48


DATASETS.add(DatasetSource(
    "state_incomes", StateIncomesConfig, keyword_loader(state_incomes), "US states' incomes (libpysal)",
    tasks=("node_regression",),
))
