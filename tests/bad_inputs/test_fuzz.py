"""Fuzzing the file loaders: whatever bytes a file holds, they answer with a shiftbench
ConfigError (one line) or load it; nothing else escapes (hypothesis, property-based testing)."""

import io
import zipfile

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from shiftbench.data.files import load_signal_file
from shiftbench.errors import ConfigError
from shiftbench.graphs.files import load_graph_file

SETTINGS = settings(max_examples=200, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])


def npz_like(draw_bytes: bytes) -> bytes:
    """A zip archive whose members are the drawn bytes, so the fuzz reaches numpy's parser."""
    buffer = io.BytesIO()
    with zipfile.ZipFile(buffer, "w") as archive:
        archive.writestr("signals.npy", draw_bytes)
        archive.writestr("labels.npy", draw_bytes[::-1])
    return buffer.getvalue()


csv_text = st.text(alphabet=st.sampled_from(list("0123456789,.-\n e+naifINFlabelsourcetargetweight\"")), max_size=300)
contents = st.one_of(st.binary(max_size=400), csv_text.map(str.encode))
# Array members that start like a .npy file, so the fuzz reaches numpy's header parser.
members = st.one_of(st.binary(max_size=400), st.binary(max_size=400).map(lambda tail: b"\x93NUMPY\x01\x00" + tail))


def loads_or_refuses(load) -> None:
    try:
        load()
    except ConfigError as error:
        assert "\n" not in str(error)


@SETTINGS
@given(content=contents, suffix=st.sampled_from([".csv", ".npz"]))
def test_signal_loader_answers_any_bytes_with_its_own_error(tmp_path, content, suffix):
    path = tmp_path / f"signals{suffix}"
    path.write_bytes(content)
    loads_or_refuses(lambda: load_signal_file(str(path)))


@SETTINGS
@given(content=members)
def test_signal_loader_answers_any_zip_members_with_its_own_error(tmp_path, content):
    path = tmp_path / "signals.npz"
    path.write_bytes(npz_like(content))
    loads_or_refuses(lambda: load_signal_file(str(path)))


@SETTINGS
@given(content=contents, suffix=st.sampled_from([".csv", ".npz", ".graphml", ".gml"]))
def test_graph_loader_answers_any_bytes_with_its_own_error(tmp_path, content, suffix):
    path = tmp_path / f"graph{suffix}"
    path.write_bytes(content)
    loads_or_refuses(lambda: load_graph_file(str(path), nodes=5))


@SETTINGS
@given(content=members)
def test_graph_loader_answers_any_zip_members_with_its_own_error(tmp_path, content):
    path = tmp_path / "graph.npz"
    path.write_bytes(npz_like(content))
    loads_or_refuses(lambda: load_graph_file(str(path), nodes=5))


def write_csv(path, rows: int):
    labels = np.arange(rows) % 2
    path.write_text("\n".join(["label,a,b", *[f"{label},{index % 7},{index * 2}" for index, label in enumerate(labels)]]) + "\n")
    return path


def test_a_well_formed_csv_still_loads(tmp_path):
    # The fuzz's anchor: refusing everything would pass the fuzz, not this.
    dataset = load_signal_file(str(write_csv(tmp_path / "ok.csv", 50)))
    assert (dataset.samples, dataset.nodes, dataset.features) == (50, 2, 1)


def test_a_csv_too_short_to_split_is_refused_in_one_line(tmp_path):
    with pytest.raises(ConfigError, match=r"each class needs at least 3 for a stratified train/val/test split"):
        load_signal_file(str(write_csv(tmp_path / "short.csv", 2)))
