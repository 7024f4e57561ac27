"""``shiftbench --help``: every group and option a user can pick, and the config their overrides compose to."""

import sys

import pytest

from shiftbench.registry import DATASETS, FAMILIES, GRAPH_SOURCES


def test_help_lists_every_registered_component_and_every_yaml_group(monkeypatch, capsys):
    from shiftbench import cli

    monkeypatch.setattr(sys, "argv", ["shiftbench", "--help"])
    cli.main()
    groups = dict(line.split(": ", 1) for line in capsys.readouterr().out.splitlines() if ": " in line and line[0].isalpha())
    for group, registry in (("arch", FAMILIES), ("data", DATASETS), ("graph", GRAPH_SOURCES)):
        assert set(groups[group].split(", ")) == set(registry.names())
    assert groups["preset"] == "series_fcn, series_mlp" and "families" in groups["experiment"]


def test_help_shows_the_config_its_overrides_compose_to(monkeypatch, capsys):
    from shiftbench import cli

    monkeypatch.setattr(sys, "argv", ["shiftbench", "--help", "arch=fc", "+preset=series_mlp"])
    cli.main()
    shown = capsys.readouterr().out.split("== Config (override any key: key=value) ==\n")[1]
    assert "family: fc" in shown and "optimizer: adadelta" in shown and "hydra" not in shown


def test_help_with_an_override_that_does_not_compose_is_a_one_line_error(monkeypatch, capsys):
    from shiftbench import cli

    monkeypatch.setattr(sys, "argv", ["shiftbench", "--help", "arch=cnn"])
    with pytest.raises(SystemExit) as stopped:
        cli.main()
    error = capsys.readouterr().err
    assert stopped.value.code == 2 and error.count("\n") == 1 and "arch='cnn' is not accepted" in error
