"""Users' signal files that are well formed load as they are."""

import numpy as np
import pytest

from shiftbench.data.files import load_signal_file
from shiftbench.errors import ConfigError


def test_npz_with_features_split_and_positions(tmp_path):
    signals = np.random.default_rng(0).standard_normal((12, 4, 3))
    split = np.array([0] * 6 + [1] * 3 + [2] * 3)
    positions = np.random.default_rng(1).random((4, 2))
    np.savez(tmp_path / "d.npz", signals=signals, labels=np.tile([5, 7], 6), split=split, positions=positions)
    dataset = load_signal_file(str(tmp_path / "d.npz"))
    assert dataset.signals.shape == (12, 4, 3) and dataset.signals.dtype == np.float32
    assert dataset.labels.tolist() == [0, 1] * 6
    assert dataset.splits.test.tolist() == [9, 10, 11]
    np.testing.assert_allclose(dataset.native_graph.positions.numpy(), positions, rtol=1e-6)


def test_csv_rows_are_samples_with_a_label_column(tmp_path):
    path = tmp_path / "d.csv"
    rows = [f"{label},{i % 4},{i + 1.5},{i + 2}" for i, label in enumerate(["b", "a", "c"] * 5)]
    path.write_text("label,n0,n1,n2\n" + "\n".join(rows))
    dataset = load_signal_file(str(path))
    assert dataset.signals.shape == (15, 3, 1) and dataset.classes == 3
    assert dataset.labels[:3].tolist() == [1, 0, 2]  # 'a' < 'b' < 'c'
    assert dataset.name == "d"


def test_labels_that_read_as_numbers_sort_numerically(tmp_path):
    np.savez(tmp_path / "d.npz", signals=np.zeros((30, 2)), labels=np.repeat(["2", "10", "1"], 10))
    dataset = load_signal_file(str(tmp_path / "d.npz"))
    assert dataset.labels[[0, 10, 20]].tolist() == [1, 2, 0]


def test_csv_labels_that_differ_beyond_float_precision_stay_two_classes(tmp_path):
    # 10000000000000000001 and ...02 are one float64; read as written they are two classes.
    path = tmp_path / "d.csv"
    rows = [f"{label},{i % 5},{(i * 7) % 3}" for i, label in enumerate(["10000000000000000001", "10000000000000000002"] * 6)]
    path.write_text("label,n0,n1\n" + "\n".join(rows))
    assert load_signal_file(str(path)).classes == 2


def test_a_small_archive_that_inflates_beyond_memory_is_refused_before_reading(tmp_path, monkeypatch):
    import shiftbench.npz_input

    np.savez_compressed(tmp_path / "bomb.npz", signals=np.zeros((2**24, 1), dtype=np.float32), labels=np.zeros(3))
    assert (tmp_path / "bomb.npz").stat().st_size < 200_000  # 64 MB of zeros compress to kilobytes
    monkeypatch.setattr(shiftbench.npz_input, "available_memory_bytes", lambda: 10**7)
    monkeypatch.setattr(np, "load", lambda *args, **kwargs: pytest.fail("read before its size was checked"))
    with pytest.raises(ConfigError, match=r"would take 0\.1 GB of memory to read \('signals\.npy' alone 0\.1 GB\), but 0\.0 GB"):
        load_signal_file(str(tmp_path / "bomb.npz"))


def test_byte_string_labels_are_read_as_text(tmp_path):
    np.savez(tmp_path / "d.npz", signals=np.zeros((30, 2)), labels=np.repeat([b"low", b"high", b"mid"], 10))
    dataset = load_signal_file(str(tmp_path / "d.npz"))
    assert dataset.classes == 3 and dataset.labels[:10].tolist() == [1] * 10  # 'high' < 'low' < 'mid'


def test_values_per_signal_from_npz_and_csv_load_alike(tmp_path):
    signals = np.random.default_rng(2).standard_normal((20, 3))
    values = signals @ np.array([1.0, -2.0, 0.5])
    np.savez(tmp_path / "v.npz", signals=signals, targets=values)
    lines = ["n0,n1,n2,target"] + [",".join(repr(float(cell)) for cell in [*row, value]) for row, value in zip(signals, values)]
    (tmp_path / "v.csv").write_text("\n".join(lines) + "\n")
    from_npz, from_csv = load_signal_file(str(tmp_path / "v.npz")), load_signal_file(str(tmp_path / "v.csv"))
    assert from_npz.labels.shape == (20, 1) and from_npz.labels.dtype == np.float32 and from_npz.classes == 1
    np.testing.assert_array_equal(from_npz.labels, from_csv.labels)
    np.testing.assert_array_equal(from_npz.signals, from_csv.signals)
    assert len(from_npz.splits.test) == 4  # a plain random split: there are no classes to stratify by


def test_values_on_nodes_are_nan_where_the_mask_says_they_are_not_targets(tmp_path):
    rng = np.random.default_rng(3)
    mask = rng.random((15, 4)) < 0.5
    mask[0, 0] = True
    node_values = np.where(mask, rng.standard_normal((15, 4)), np.nan)  # NaN only where mask is False
    np.savez(tmp_path / "n.npz", signals=rng.standard_normal((15, 4)), node_targets=node_values, mask=mask)
    dataset = load_signal_file(str(tmp_path / "n.npz"))
    assert dataset.labels.shape == (15, 4, 1)
    np.testing.assert_array_equal(~np.isnan(dataset.labels[:, :, 0]), mask)


def test_a_task_that_does_not_learn_the_files_targets_is_refused_in_one_line(tmp_path):
    from shiftbench.config import validate
    from shiftbench.job import check_inputs
    from tests.conftest import composed

    np.savez(tmp_path / "v.npz", signals=np.zeros((20, 3)), targets=np.arange(20.0))
    run = validate(composed(["data=file", f"data.path={tmp_path / 'v.npz'}", f"results_dir={tmp_path}"]))
    with pytest.raises(ConfigError, match=r"task=classification is not accepted for data.path='.*v.npz', whose "
                                          r"targets have shape \(20, 1\) \(float32\); accepted: a task that learns "
                                          r"them, or class labels \(samples,\) for task=classification"):
        check_inputs(run)


def test_classes_on_nodes_and_source_nodes_load_for_their_tasks(tmp_path):
    from shiftbench.registry import TASKS

    rng = np.random.default_rng(5)
    node_labels = rng.integers(-1, 3, size=(20, 4))
    node_labels[0, 0] = 1
    np.savez(tmp_path / "c.npz", signals=rng.standard_normal((20, 4)), node_labels=node_labels)
    np.savez(tmp_path / "s.npz", signals=rng.standard_normal((20, 4)), sources=np.arange(20) % 4)
    on_nodes, sources = load_signal_file(str(tmp_path / "c.npz")), load_signal_file(str(tmp_path / "s.npz"))
    assert np.array_equal(on_nodes.labels, node_labels) and on_nodes.classes == 3
    assert TASKS["node_classification"].fits(on_nodes.labels, 4) and not TASKS["classification"].fits(on_nodes.labels, 4)
    assert sources.labels.tolist() == [n % 4 for n in range(20)]  # node indices as given, not re-coded
    assert TASKS["source_localization"].fits(sources.labels, 4)
