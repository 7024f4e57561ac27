"""Adding a family or a graph source is one file plus one line in the registry's module list,
as the contributor guide says (common practice, no source: a plug-in registry)."""

import sys
import textwrap

import pytest

from shiftbench import registry
from shiftbench.job import run_job
from tests.conftest import composed

TOY = '''
"""A toy family and a toy graph source, written as a contributor would."""
from dataclasses import dataclass

import networkx as nx
from torch import nn

from shiftbench.graphs.graph import Graph
from shiftbench.graphs.operators import GraphConfig
from shiftbench.registry import FAMILIES, GRAPH_SOURCES, Family, GraphSource


class NodeMean(nn.Module):
    """logits = W mean_n(x_n) + b. Shapes: (batch, nodes, features) -> (batch, classes)."""

    def __init__(self, features, classes):
        super().__init__()
        self.linear = nn.Linear(features, classes)

    def forward(self, x):
        return self.linear(x.mean(dim=1))


@dataclass
class ToyConfig:
    family: str = "toy_mean"


@dataclass
class StarConfig(GraphConfig):
    source: str = "star"


FAMILIES.add(Family(
    name="toy_mean", schema=ToyConfig, display="toy",
    planned_parameters=lambda arch, nodes, features, outputs, head: (features + 1) * outputs,
    build=lambda arch, nodes, features, outputs, shift, head: NodeMean(features, outputs),
))
GRAPH_SOURCES.add(GraphSource(
    "star", StarConfig, lambda config, dataset: Graph.from_networkx(nx.star_graph(dataset.nodes - 1), name="star")
))
'''


@pytest.fixture
def toy_module(tmp_path, monkeypatch):
    (tmp_path / "toy_components.py").write_text(textwrap.dedent(TOY))
    monkeypatch.syspath_prepend(str(tmp_path))
    monkeypatch.setattr(registry, "COMPONENT_MODULES", [*registry.COMPONENT_MODULES, "toy_components"])
    yield
    from hydra.core.config_store import ConfigStore

    from shiftbench import config_store

    for table, group, name in ((registry.FAMILIES, "arch", "toy_mean"), (registry.GRAPH_SOURCES, "graph", "star")):
        table.entries.pop(name, None)
        ConfigStore.instance().repo.get(group, {}).pop(f"{name}.yaml", None)
        config_store._stored.discard((group, name))
    registry._loaded.discard("toy_components")
    sys.modules.pop("toy_components", None)


def test_a_toy_family_added_in_one_file_runs_as_a_job_and_counts_its_parameters(toy_module, tmp_path):
    config = composed(["data.samples_per_class=20", "data.nodes=16", "train.epochs=2", "arch=toy_mean",
                       f"results_dir={tmp_path}"])
    record = run_job(config, None, [], live=False)
    assert record["status"] == "completed" and record["parameters"] == (1 + 1) * 4


def test_a_toy_graph_source_added_in_one_file_feeds_graph_conv(toy_module, tmp_path):
    config = composed(["data.samples_per_class=20", "data.nodes=16", "train.epochs=2", "graph=star",
                       f"results_dir={tmp_path}"])
    record = run_job(config, None, [], live=False)
    assert (record["status"], record["graph"]) == ("completed", "star")
