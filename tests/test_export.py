"""Records exported as TensorBoard runs, read back with TensorBoard's own event reader."""

import pandas as pd
import pytest

from shiftbench.export import export_tensorboard
from shiftbench.job import run_job
from tests.conftest import home


def test_each_record_becomes_a_run_whose_scalars_are_its_curve(small_config, tmp_path):
    # Reference: tensorboard's EventAccumulator reads what torch.utils.tensorboard wrote.
    from tensorboard.backend.event_processing.event_accumulator import EventAccumulator

    records = [run_job(small_config(f"seed={seed}"), None, [], live=False, quiet=True) for seed in (0, 1)]
    runs = export_tensorboard([tmp_path / "store"], tmp_path / "tb")
    assert len(runs) == 2
    for record in records:
        (run,) = [path for path in runs if path.name.endswith(record["config_hash"][:8])]
        assert run.name.startswith(f"graph_conv-native-seed{record['seed']}-")
        events = EventAccumulator(str(run))
        events.Reload()
        curve = pd.read_csv(home(record) / "curve.csv")
        loss = [event.value for event in events.Scalars("train/loss")]
        assert loss == pytest.approx(curve["train_loss"].tolist(), rel=1e-6)
        assert [event.step for event in events.Scalars("val/accuracy")] == curve["epoch"].tolist()
        assert events.Scalars("test/accuracy")[0].value == pytest.approx(record["test_accuracy"], rel=1e-6)


def test_a_folder_without_records_is_refused_in_one_line_and_writes_nothing(tmp_path, capsys):
    from shiftbench.cli import export_main

    (tmp_path / "empty").mkdir()
    with pytest.raises(SystemExit) as stopped:
        export_main([str(tmp_path / "empty"), "--out", str(tmp_path / "runs")])
    assert stopped.value.code == 2
    assert capsys.readouterr().err.startswith(f"shiftbench-export: error: no records under {tmp_path / 'empty'}; accepted:")
    assert not (tmp_path / "runs").exists()
