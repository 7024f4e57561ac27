"""Check a whole command line before Hydra launches any job.

Every value of every sweep axis (given on the command line or by a study's
``hydra.sweeper.params``) is composed and validated once, varying one axis at a time from the
first value of each, so a typo anywhere in a sweep stops it before the first job trains. Hydra's
own composition errors are turned into the same one-line messages as the schema's, and the
user's data and graph files are read and checked.
"""

from __future__ import annotations

import os
import re
import shutil
from dataclasses import dataclass, field
from pathlib import Path

from hydra import compose, initialize_config_dir
from hydra.errors import HydraException, MissingConfigException
from omegaconf import DictConfig, OmegaConf
from omegaconf.errors import OmegaConfBaseException

from shiftbench.config import ConfigError, require_inside, validate
from shiftbench.config_store import register_defaults
from shiftbench.input_files import job_content
from shiftbench.job import check_inputs
from shiftbench.records import config_hash
from shiftbench.runtime import available_cores
from shiftbench.store import finished_record, home_of, require_plain_home, require_writable_home
from shiftbench.sweep_axes import add_study_axes, split_overrides

# Hydra flags that take the next argument as their value.
FLAGS_WITH_VALUE = {"-cd", "--config-dir", "-cn", "--config-name", "-cp", "--config-path", "-c", "--cfg", "-p", "--package"}
# Flags after which Hydra prints information and runs nothing.
INFORMATION_FLAGS = {"-h", "--help", "--hydra-help", "-i", "--info", "--version", "--shell-completion", "-sc"}


def override_arguments(arguments: list[str]) -> list[str] | None:
    """The override arguments of a command line, or None when it only asks for information."""
    overrides, skip_next = [], False
    for argument in arguments:
        if skip_next:
            skip_next = False
        elif argument in INFORMATION_FLAGS:
            return None
        elif argument in FLAGS_WITH_VALUE:
            skip_next = True
        elif not argument.startswith("-"):
            overrides.append(argument)
    return overrides


# Hydra keys a user may set to say where jobs write.
OUTPUT_DIRECTORY_KEYS = ("hydra.run.dir", "hydra.sweep.dir", "hydra.sweep.subdir", "hydra.output_subdir")
# The least free space a results folder's disk must have for records, curves and checkpoints.
MINIMUM_FREE_BYTES = 50 * 2**20


@dataclass
class Checked:
    """What the pre-launch check found: how many configs it composed, and notes on sweep values
    that give the same configuration (the store runs such a configuration once)."""

    configs: int
    notes: list[str] = field(default_factory=list)


def preflight(arguments: list[str], config_dir: Path) -> Checked:
    """Validate every job a command line would launch.

    Raises:
        ConfigError: one line naming the bad key, its value and what is accepted.
    """
    overrides = override_arguments(arguments)
    if overrides is None:
        return Checked(0)
    for override in overrides:
        key, _, value = override.partition("=")
        if key.lstrip("+~") in OUTPUT_DIRECTORY_KEYS and value not in ("", "null"):
            require_inside(key.lstrip("+~"), value)
    try:
        axes, fixed = split_overrides(overrides)
    except HydraException as error:
        raise ConfigError(_one_line(str(error))) from None
    if axes and not any(argument in ("-m", "--multirun") for argument in arguments):
        first = next(iter(axes.values()))
        given = next((line for line in overrides if line.split("=", 1)[0] == first[0].split("=", 1)[0]), first[0])
        raise ConfigError(f"{given}: several values run only as a sweep; accepted: shiftbench -m {given} (one job each), "
                          "or one value")

    register_defaults()
    name, user_dir = config_source(arguments)
    primary = config_dir.resolve()
    if user_dir is not None:  # the user's folder first, as Hydra's -cd makes it; ours behind it
        primary, fixed = user_dir, [f"hydra.searchpath=[file://{primary}]", *fixed]
    with initialize_config_dir(str(primary), version_base="1.3", job_name="shiftbench"):
        base = fixed + [values[0] for values in axes.values()]
        composed = compose_checked(base, name)
        add_study_axes(axes, fixed, composed.hydra.sweeper.get("params") or {})
        widened = fixed + [values[0] for values in axes.values()]
        if widened != base:  # a study added axes: compose with them
            base, composed = widened, compose_checked(widened, name)
        first = _validate(composed)  # results_dir first: the folders below derive from it
        for key in ("run.dir", "sweep.dir"):  # as resolved: an interpolation may lead outside too
            try:
                folder = str(OmegaConf.select(composed.hydra, key))
            except OmegaConfBaseException as error:
                raise ConfigError(f"hydra.{key} does not resolve ({str(error).splitlines()[0]}); accepted: a folder "
                                  "path, or an interpolation that resolves") from None
            require_inside(f"hydra.{key}", folder)
        checked = Checked(1)
        threads, cores = composed.threads, available_cores()
        if isinstance(threads, int) and threads > cores:
            checked.notes.append(f"note: threads={threads} is more than the {cores} cores this process may use; torch's "
                                 "threads beyond them wait on each other and a job runs slower, not faster")
        for position, values in enumerate(axes.values()):
            seen = {first: values[0]}
            for value in values[1:]:
                variant = list(base)
                variant[len(fixed) + position] = value
                digest = _validate(compose_checked(variant, name))
                checked.configs += 1
                if digest in seen:
                    checked.notes.append(
                        f"note: {value} gives the same configuration as {seen[digest]} (with {', '.join(base) or 'the defaults'}); "
                        f"it runs once and the tables show it once, as {seen[digest]}"
                    )
                seen.setdefault(digest, value)
    return checked


def config_source(arguments: list[str]) -> tuple[str, Path | None]:
    """The primary config's name (``-cn``/``--config-name``, default ``config``) and the folder
    ``-cd``/``--config-dir`` adds, so that the check composes what Hydra will."""
    name, folder = "config", None
    for position, argument in enumerate(arguments):
        flag, _, value = argument.partition("=")
        if not value and position + 1 < len(arguments):
            value = arguments[position + 1]
        if flag in ("-cn", "--config-name"):
            name = value
        elif flag in ("-cd", "--config-dir"):
            folder = Path(value).resolve()
    return name, folder


def compose_checked(overrides: list[str], name: str = "config") -> DictConfig:
    """The config (with its ``hydra`` node) that ``overrides`` compose to, inside an initialized
    Hydra; a group option or key that does not exist is a one-line :class:`ConfigError`."""
    try:
        return compose(name, overrides=overrides, return_hydra_config=True)
    except MissingConfigException as error:
        missing = (error.missing_cfg_file or "").rsplit("/", 1)
        if len(missing) == 2 and error.options:
            raise ConfigError(
                f"{missing[0]}={missing[1]!r} is not accepted; accepted: one of {', '.join(error.options)}"
            ) from None
        raise ConfigError(_one_line(str(error))) from None
    except HydraException as error:
        added = _added_key_retry(overrides, error, name)
        if added is not None:
            _validate(added)
        raise ConfigError(_one_line(str(error))) from None


def _added_key_retry(overrides: list[str], error: HydraException, name: str) -> DictConfig | None:
    """Hydra refuses ``key=value`` for a key the config lacks; compose it as ``+key=value`` so the
    schema can name the unknown key and the accepted ones."""
    refused = re.search(r"Could not override '([^']+)'", str(error))
    if refused is None or "is not in struct" not in str(error.__cause__):
        return None
    retried = ["+" + line if line.split("=", 1)[0] == refused.group(1) else line for line in overrides]
    try:
        return compose(name, overrides=retried, return_hydra_config=True)
    except HydraException:
        return None


def job_config(composed: DictConfig) -> DictConfig:
    """A composed config without its ``hydra`` node: what a job receives."""
    return OmegaConf.masked_copy(composed, [key for key in composed.keys() if key != "hydra"])


def _validate(config: DictConfig) -> str:
    """Check a composed job config and its files; return its config hash."""
    job = job_config(config)
    _require_resolvable(job)
    run = validate(job)
    require_writable_folder(Path(run.results_dir))
    check_inputs(run)
    digest = config_hash(job_content(run))
    home = home_of(Path(run.results_dir), digest)
    require_plain_home(home)
    if finished_record(home) is None:
        require_writable_home(home)
    return digest


def require_writable_folder(folder: Path) -> None:
    """``results_dir`` must be a folder this process can create or write in, with names the file
    system takes and some free space on its disk; refused in one line, before any job."""
    longest = 255  # bytes a file name may take on common file systems (ext4, XFS, APFS, NTFS)
    too_long = [part for part in folder.parts if len(part.encode()) > longest]
    if too_long:
        raise ConfigError(f"results_dir={str(folder)[:60]!r}...: a name in it is {len(too_long[0].encode())} bytes "
                          f"long; accepted: names of at most {longest} bytes")
    existing = folder
    while not existing.exists() and existing != existing.parent:
        existing = existing.parent
    if not existing.is_dir():
        raise ConfigError(f"results_dir={str(folder)!r}: {str(existing)!r} is a file; accepted: a folder path")
    if not os.access(existing, os.W_OK | os.X_OK):
        raise ConfigError(f"results_dir={str(folder)!r}: {str(existing)!r} is not writable here; accepted: a folder "
                          "you may write in")
    free = shutil.disk_usage(existing).free
    if free < MINIMUM_FREE_BYTES:
        raise ConfigError(f"results_dir={str(folder)!r}: its disk has {free / 2**20:.0f} MB free; accepted: a "
                          f"folder on a disk with at least {MINIMUM_FREE_BYTES // 2**20} MB free")


def _require_resolvable(config: DictConfig, prefix: str = "") -> None:
    """Refuse the first value whose interpolation does not resolve (``${oc.env:UNSET}``,
    ``${nope}``), naming its key."""
    for key in config.keys():
        try:
            value = config[key]
        except OmegaConfBaseException as error:
            raise ConfigError(
                f"{prefix}{key}={OmegaConf.to_container(config)[key]!r} does not resolve ({str(error).splitlines()[0]}); "
                "accepted: a value, or an interpolation that resolves (${oc.env:NAME} needs NAME set)"
            ) from None
        if isinstance(value, DictConfig):
            _require_resolvable(value, f"{prefix}{key}.")


def _one_line(message: str) -> str:
    return "; ".join(line.strip() for line in message.splitlines() if line.strip())
