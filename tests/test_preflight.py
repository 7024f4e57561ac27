"""Bad command lines stop before any work with one line naming the key, the value and what is
accepted; good ones pass."""

import pytest
import torch

from shiftbench.config import ConfigError
from shiftbench.preflight import preflight
from tests.conftest import CONFIG_DIR


@pytest.mark.parametrize(
    ("arguments", "named"),
    [
        (["arch.order=abc"], "arch.order='abc'"),
        (["+arch.foo=1"], "arch.foo"),
        (["arch.foo=1"], "arch.foo"),
        (["+foo=1"], "foo"),
        (["arch=cnn"], "arch='cnn'"),
        (["graph=ring"], "graph='ring'"),
        (["arch.order=-1"], "arch.order=-1"),
        (["train.epochs=0"], "train.epochs=0"),
        (["train.lr=0"], "train.lr=0.0"),
        (["train.lr=-1e-3"], "train.lr=-0.001"),
        (["data.nodes=1"], "data.nodes=1"),
        (["train.optimizer=lbfgs"], "train.optimizer='lbfgs'"),
        (["graph.operator=lap"], "graph.operator='lap'"),
        (["-m", "arch=fc,cnn"], "arch='cnn'"),
        (["-m", "arch.order=1,2,-3"], "arch.order=-3"),
        (["-m", "+experiment=families", "seed=0,-1"], "seed=-1"),
        (["-m", "+experiment=nope"], "experiment='nope'"),
        (["graph=grid", "graph.rows=4"], "graph.rows*graph.cols=4*8=32"),
        (["graph=knn", "graph.neighbors=64"], "graph.neighbors=64"),
        pytest.param(["device=cuda"], "device='cuda'", marks=pytest.mark.skipif(torch.cuda.is_available(), reason="a CUDA device is present")),
    ],
)
def test_bad_command_line_is_one_line_naming_key_and_value(arguments, named):
    with pytest.raises(ConfigError) as caught:
        preflight(arguments, CONFIG_DIR)
    message = str(caught.value)
    assert "\n" not in message
    assert named in message
    assert "accepted" in message


@pytest.mark.parametrize(
    "arguments",
    [
        [],
        ["arch=fc"],
        ["arch=line_conv", "arch.order=4", "seed=2"],
        ["arch=graph_conv", "graph=line", "arch.order=2", "train.epochs=5"],
        ["-m", "arch=fc,line_conv,graph_conv", "seed=0,1,2"],
        ["-m", "+experiment=families"],
        ["graph=grid", "graph.rows=8", "graph.cols=8"],
        ["-m", "+experiment=families", "hydra/launcher=slurm_cpu", "hydra.launcher.partition=cpu"],
        ["-m", "+experiment=claims"],
    ],
)
def test_documented_command_lines_pass(arguments):
    assert preflight(arguments, CONFIG_DIR).configs >= 1


def test_every_value_of_a_study_axis_is_checked():
    # The families study sweeps 10 setups and 3 seeds: the base config plus 9 + 2 variants.
    checked = preflight(["-m", "+experiment=families"], CONFIG_DIR)
    assert (checked.configs, checked.notes) == (12, [])


def test_sweep_values_that_give_one_configuration_are_named_not_dropped_silently():
    # graph=... on the command line wins over the study rows' graphs: the three graph rows at
    # one readout collapse into one configuration.
    checked = preflight(["-m", "+experiment=families", "graph=sbm"], CONFIG_DIR)
    assert any(
        note.startswith("note: +experiment/setups=graph_conv_rewired gives the same configuration as "
                        "+experiment/setups=graph_conv_native")
        for note in checked.notes
    )
    assert len(checked.notes) == 4  # rewired and line, at each readout


def test_a_model_too_large_to_train_is_refused_with_the_count_it_would_need():
    # An fc with one hidden layer as wide as the signal (100,000 nodes): 100,000 * 100,000
    # weights and 100,000 biases, then (100,000 + 1) * 4 weights and biases for the classes.
    with pytest.raises(ConfigError, match=r"arch=fc at 100,000 nodes \(10,000,500,004 parameters, 800 samples\) needs 440\.9 GB"):
        preflight(["arch=fc", "arch.hidden=[100000]", "data.nodes=100000"], CONFIG_DIR)


def test_fc_at_default_width_on_a_large_signal_is_not_refused():
    preflight(["arch=fc", "data.nodes=100000"], CONFIG_DIR)


def test_a_config_of_the_users_own_folder_is_checked_before_any_job(tmp_path):
    # -cd/--config-dir and -cn/--config-name, as Hydra reads them: the user's config is composed.
    (tmp_path / "mine.yaml").write_text("defaults:\n  - config\n  - _self_\n\ntrain:\n  epochs: 0\n")
    for arguments in (["-cd", str(tmp_path), "-cn", "mine"], [f"--config-dir={tmp_path}", "--config-name=mine", "-m", "seed=0,1"]):
        with pytest.raises(ConfigError, match=r"train\.epochs=0 is not accepted"):
            preflight(arguments, CONFIG_DIR)


def test_an_output_folder_that_leaves_through_an_interpolation_is_refused(monkeypatch):
    monkeypatch.setenv("SHIFTBENCH_TEST_ESCAPE", "../outside")
    with pytest.raises(ConfigError, match=r"hydra\.run\.dir='\.\./outside' is not accepted"):
        preflight(["hydra.run.dir=${oc.env:SHIFTBENCH_TEST_ESCAPE}"], CONFIG_DIR)


def test_more_threads_than_cores_gets_a_note_not_a_refusal():
    # Common practice, no source: compute threads beyond the cores contend instead of helping.
    from shiftbench.runtime import available_cores

    checked = preflight([f"threads={available_cores() + 1}"], CONFIG_DIR)
    assert checked.notes == [f"note: threads={available_cores() + 1} is more than the {available_cores()} cores this "
                             "process may use; torch's threads beyond them wait on each other and a job runs slower, "
                             "not faster"]
