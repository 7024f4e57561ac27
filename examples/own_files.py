"""Write a graph and signals of our own, as a user would bring them: ``signals.csv`` (one row a
sample, a ``label`` column) and ``roads.csv`` (an edge list). Not the demo: a random geometric
graph whose node numbers are shuffled, so the column order carries no structure, and three
classes of signals filtered on it.

Usage: python examples/own_files.py FOLDER [--rewired] [--seed N] [--per-class N]

``--rewired`` writes, as ``roads.csv``, a degree-preserving rewiring of the graph the signals were
filtered on: a graph with the right degrees on which the signals do not live (the study must say
that this graph adds nothing). ``--seed N`` draws other signals and another rewiring (default 0); ``--per-class N``
writes N signals of each class (default 60).
"""

from __future__ import annotations

import argparse
from pathlib import Path

import networkx as nx
import numpy as np
import pandas as pd


def write_own_files(folder: Path, nodes: int = 40, per_class: int = 60, rewired: bool = False, seed: int = 0) -> None:
    """Write ``signals.csv`` and ``roads.csv`` into ``folder``: a random geometric graph on
    ``nodes`` nodes, numbered at random, and ``per_class`` signals of each of three classes,
    ``low`` ``(I + S)^3 w``, ``high`` ``(I - S)^3 w`` and ``white`` ``w`` (``w`` white noise, ``S``
    the graph's normalized adjacency ``D^-1/2 A D^-1/2``), each scaled to norm ``sqrt(nodes)``:
    how a signal varies across *linked* nodes tells its class. ``rewired``: the edge list written
    is the graph after degree-preserving swaps (networkx's ``double_edge_swap``, 5 per edge).
    ``seed``: the signals' noise and the swaps (the geometric graph stays the same)."""
    rng = np.random.default_rng(seed)
    graph = nx.random_geometric_graph(nodes, 0.3, seed=1)
    graph = nx.relabel_nodes(graph, dict(zip(range(nodes), rng.permutation(nodes).tolist())))
    adjacency = nx.to_numpy_array(graph, nodelist=range(nodes))
    scale = 1 / np.sqrt(np.maximum(adjacency.sum(axis=1), 1))
    shift, identity = scale[:, None] * adjacency * scale[None, :], np.eye(nodes)
    filters = [np.linalg.matrix_power(identity + shift, 3), np.linalg.matrix_power(identity - shift, 3), identity]
    signals = [filters[c] @ rng.standard_normal(nodes) for c in range(3) for _ in range(per_class)]
    table = pd.DataFrame([x / np.linalg.norm(x) * np.sqrt(nodes) for x in signals], columns=[f"n{i}" for i in range(nodes)])
    table["label"] = np.repeat(["low", "high", "white"], per_class)
    table.to_csv(folder / "signals.csv", index=False)
    if rewired:
        graph = graph.copy()
        nx.double_edge_swap(graph, nswap=5 * graph.number_of_edges(), max_tries=500 * graph.number_of_edges(), seed=2 + seed)
    edges = [*graph.edges, *((v, u) for u, v in graph.edges)]
    pd.DataFrame(edges, columns=["source", "target"]).to_csv(folder / "roads.csv", index=False)


if __name__ == "__main__":
    parser = argparse.ArgumentParser(prog="python examples/own_files.py", description=__doc__.splitlines()[0])
    parser.add_argument("folder", type=Path, nargs="?", default=Path("."))
    parser.add_argument("--rewired", action="store_true", help="write a degree-preserving rewiring as roads.csv")
    parser.add_argument("--seed", type=int, default=0, help="the signals' noise and the rewiring (default 0)")
    parser.add_argument("--per-class", type=int, default=60, help="signals of each class (default 60)")
    arguments = parser.parse_args()
    folder = arguments.folder
    folder.mkdir(parents=True, exist_ok=True)
    if arguments.per_class < 2:
        parser.error(f"--per-class={arguments.per_class} is not accepted; accepted: an integer >= 2")
    write_own_files(folder, per_class=arguments.per_class, rewired=arguments.rewired, seed=arguments.seed)
    print(f"wrote {folder / 'signals.csv'} and {folder / 'roads.csv'}")
