"""Checkpoints, resuming, and the limits that stop a job: divergence and train.max_seconds.

The resume check is bit for bit (common practice, no source: a resumed CPU run that restores
weights, optimizer moments and every generator replays the uninterrupted arithmetic exactly).
"""

import json

import pytest

from shiftbench.checkpoints import CHECKPOINT_FILE, load_checkpoint, save_checkpoint
from shiftbench.data import load_dataset
from shiftbench.job import run_job
from shiftbench.models import build_model
from shiftbench.records import RECORD_FILE
from shiftbench.training import Checkpointing, seed_everything, train
from shiftbench.config import validate
from tests.conftest import home, home_of_config


class Killed(BaseException):
    """Stands in for a kill right after an epoch's checkpoint was written."""


def fresh_model(run, dataset):
    seed_everything(run.seed)
    return build_model(run.arch, dataset.nodes, dataset.features, dataset.classes, shift=None)


@pytest.mark.parametrize(("family", "kill_after", "schedule"), [
    ("fc", 3, ()), ("line_conv", 2, ()),
    # a learning rate that halves on a plateau (its scheduler's state is resumed too), weights of the lowest training loss
    # (here the loss rises in epochs 2 and 3, so the rate falls after epoch 3, past the kill)
    ("fc", 2, ("train.lr=0.3", "train.plateau_patience=1", "train.keep=lowest_train_loss")),
])
def test_a_resumed_run_ends_with_the_figures_of_an_uninterrupted_one_bit_for_bit(small_config, tmp_path, family, kill_after, schedule):
    run = validate(small_config(f"arch={family}", "arch.dropout=0.3", "train.epochs=7", "train.patience=7", *schedule))
    dataset = load_dataset(run.data)
    whole = train(fresh_model(run, dataset), dataset, run.train, run.seed)

    def kill(row):
        if row["epoch"] == kill_after:
            raise Killed

    every = Checkpointing(tmp_path, every=1, config_hash="same")
    with pytest.raises(Killed):
        train(fresh_model(run, dataset), dataset, run.train, run.seed, on_epoch=kill, checkpointing=every)
    model = fresh_model(run, dataset)
    resumed = train(model, dataset, run.train, run.seed, checkpointing=every)

    assert resumed.resumed_from_epoch == kill_after + 1
    drop_seconds = [{key: value for key, value in row.items() if key != "seconds"} for row in resumed.curve]
    assert drop_seconds == [{key: value for key, value in row.items() if key != "seconds"} for row in whole.curve]
    for figure in ("train_score", "val_score", "test_score", "test_loss", "best_epoch", "epochs_run"):
        assert getattr(resumed, figure) == getattr(whole, figure), figure


@pytest.mark.parametrize("saved", ["other shapes", "missing keys"])
def test_a_checkpoint_that_does_not_fit_is_set_aside_and_the_run_starts_afresh(small_config, tmp_path, capsys, saved):
    run = validate(small_config("arch=fc", "arch.hidden=[16]", "train.epochs=4", "train.patience=4"))
    dataset = load_dataset(run.data)
    whole = train(fresh_model(run, dataset), dataset, run.train, run.seed)
    every = Checkpointing(tmp_path, every=1, config_hash="same")
    if saved == "other shapes":  # as a changed model class would leave it
        wider = validate(small_config("arch=fc", "arch.hidden=[32]", "train.epochs=2", "train.patience=2"))
        train(fresh_model(wider, dataset), dataset, wider.train, wider.seed, checkpointing=every)
        save_checkpoint(tmp_path, {**load_checkpoint(tmp_path, "same"), "epoch": 1})
    else:
        save_checkpoint(tmp_path, {"config_hash": "same", "epoch": 1})
    again = train(fresh_model(run, dataset), dataset, run.train, run.seed, checkpointing=every)
    assert again.resumed_from_epoch is None
    assert (again.test_loss, again.curve[-1]["train_loss"]) == (whole.test_loss, whole.curve[-1]["train_loss"])
    assert "does not fit this model" in capsys.readouterr().out
    assert len(list(tmp_path.glob("checkpoint.unusable.*.pt"))) == 1


def test_a_checkpoint_of_another_config_is_not_resumed(tmp_path):
    save_checkpoint(tmp_path, {"config_hash": "a", "epoch": 3})
    assert load_checkpoint(tmp_path, "a")["epoch"] == 3
    assert load_checkpoint(tmp_path, "b") is None


def test_a_checkpoint_that_would_run_code_is_refused(tmp_path):
    # torch.load(weights_only=True) builds tensors and plain containers only (torch docs,
    # "torch.load"); a pickled object of another class must not be loaded.
    import pickle

    class Payload:
        def __reduce__(self):
            return (print, ("ran code from the file",))

    (tmp_path / CHECKPOINT_FILE).write_bytes(pickle.dumps({"config_hash": "a", "payload": Payload()}))
    with pytest.warns(UserWarning, match="ignoring unreadable checkpoint"):
        assert load_checkpoint(tmp_path, "a") is None


def test_a_job_killed_after_a_checkpoint_resumes_and_says_so(small_config, tmp_path, monkeypatch):
    import shiftbench.training

    config = small_config("arch=fc", "train.checkpoint_every=2", "train.epochs=6", "train.patience=6")
    original = shiftbench.training.evaluate
    calls = {"count": 0}

    def dies_in_epoch_five(*args, **kwargs):
        calls["count"] += 1
        if calls["count"] == 5:
            raise Killed
        return original(*args, **kwargs)

    monkeypatch.setattr(shiftbench.training, "evaluate", dies_in_epoch_five)
    folder = home_of_config(config)
    with pytest.raises(Killed):
        run_job(config, None, [], live=False)
    assert (folder / CHECKPOINT_FILE).is_file() and not (folder / RECORD_FILE).exists()
    monkeypatch.setattr(shiftbench.training, "evaluate", original)
    record = run_job(config, None, [], live=False)
    assert record["status"] == "completed" and record["resumed_from_epoch"] == 5
    assert not (folder / CHECKPOINT_FILE).exists()


def test_the_checkpoint_interval_does_not_change_what_a_job_is(small_config, tmp_path):
    first = run_job(small_config("train.checkpoint_every=1"), None, [], live=False)
    again = run_job(small_config("train.checkpoint_every=0"), None, [], live=False)
    assert again.get("skipped") and again["config_hash"] == first["config_hash"]


def test_a_diverging_job_fails_with_the_reason_and_the_epoch(small_config, tmp_path):
    record = run_job(small_config("train.lr=1e30", "train.optimizer=sgd"), None, [], live=False)
    assert record["status"] == "failed" and record["failed_epoch"] == 1
    assert record["error"] == "TrainingDiverged: the training loss became nan in epoch 1"


def test_a_job_over_its_time_limit_stops_with_the_best_weights_so_far(small_config, tmp_path, monkeypatch):
    import shiftbench.training

    clock = {"now": 0.0}

    def fake_clock():
        clock["now"] += 0.01  # every reading of the clock: 10 ms
        return clock["now"]

    monkeypatch.setattr(shiftbench.training.time, "perf_counter", fake_clock)
    record = run_job(small_config("train.max_seconds=0.2", "train.epochs=50", "train.patience=50"), None, [], live=False)
    assert record["status"] == "timed_out" and 1 <= record["epochs_run"] < 50
    assert record["train_seconds"] >= 0.2 and 0.0 <= record["test_accuracy"] <= 1.0
    written = json.loads((home(record) / RECORD_FILE).read_text())
    assert written["status"] == "timed_out" and written["best_epoch"] <= written["epochs_run"]
