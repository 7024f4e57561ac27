"""``shiftbench --help``: the usage, every config group with its options, and the composed config.

Hydra's own help lists the groups by building a config repository per group option (a deep copy
of every stored config each time: seconds of start-up); here the options are read once from the
ConfigStore and the config folder, and the config is composed once.
"""

from __future__ import annotations

from pathlib import Path

from hydra import initialize_config_dir
from hydra.core.config_store import ConfigStore
from omegaconf import OmegaConf

from shiftbench.config_store import register_defaults
from shiftbench.preflight import compose_checked, job_config

USAGE = """\
shiftbench: train MLPs, 1-D CNNs and GNNs of polynomial graph filters on one dataset.

Usage:
  shiftbench [group=option ...] [key=value ...]     one job (its record goes to results_dir/store)
  shiftbench -m key=a,b,c ...                       a sweep over every combination (multirun)
  shiftbench -m +experiment=families                a study (see the experiment group below)
  shiftbench data=ucr data.name=GunPoint +preset=series_fcn    a published network, trained as published
  shiftbench --cfg job [overrides]                  print the composed config; Hydra's flags: --hydra-help
"""


def group_options(config_dir: Path) -> dict[str, list[str]]:
    """Each config group (outside ``hydra``) and its options: the components stored in the
    ConfigStore and the YAML files under ``config_dir``."""
    register_defaults()
    groups: dict[str, set[str]] = {}
    for group, stored in ConfigStore.instance().repo.items():
        if isinstance(stored, dict) and group != "hydra":
            groups.setdefault(group, set()).update(name.removesuffix(".yaml") for name in stored)
    for file in config_dir.rglob("*.yaml"):
        group = file.parent.relative_to(config_dir).as_posix()
        if group != "." and not group.startswith("hydra"):
            groups.setdefault(group, set()).add(file.stem)
    return {group: sorted(options) for group, options in sorted(groups.items())}


def help_text(config_dir: Path, overrides: list[str]) -> str:
    """The whole help: usage, groups and options, and the config ``overrides`` compose to.

    Raises:
        ConfigError: an override that does not compose.
    """
    register_defaults()
    with initialize_config_dir(str(config_dir), version_base="1.3", job_name="shiftbench"):
        config = job_config(compose_checked(overrides))
    groups = "".join(f"{group}: {', '.join(options)}\n" for group, options in group_options(config_dir).items())
    return (f"{USAGE}\n== Config groups (group=option; a group outside the defaults: +group=option) ==\n{groups}\n"
            f"== Config (override any key: key=value) ==\n{OmegaConf.to_yaml(config)}")
