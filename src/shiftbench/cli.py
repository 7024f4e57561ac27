"""Command-line entry points: ``shiftbench`` (a Hydra app, one job per call, ``-m`` for sweeps)
and ``shiftbench-report``. Wiring only: the work lives in :mod:`job` and :mod:`report`."""

from __future__ import annotations

import argparse
import shutil
import signal
import sys
from pathlib import Path

import hydra
from hydra.core.hydra_config import HydraConfig
from hydra.types import RunMode
from omegaconf import DictConfig, OmegaConf

from shiftbench.config import ConfigError
from shiftbench.job import run_job
from shiftbench.preflight import override_arguments, preflight
from shiftbench.config_store import register_defaults
from shiftbench.records import MANIFEST_FILE as MANIFEST
from shiftbench.registry import TASKS
from shiftbench.runtime import catch_interrupts, keep_freed_memory

# The groups' options come from the components' schemas (see config_store); registered on import,
# before Hydra composes anything.
register_defaults()

# The config tree lives beside the source (``configs/`` at the project root), so the app finds
# it from any working directory.
CONFIG_DIR = Path(__file__).resolve().parents[2] / "configs"


def refuse_committed_results(arguments: list[str]) -> None:
    """From the source tree's root the default ``results_dir`` is the project's own results/,
    whose reports are committed: a run there must name its results_dir."""
    if Path.cwd().resolve() != CONFIG_DIR.parent or any(a.lstrip("+").startswith("results_dir=") for a in arguments):
        return
    fail("results_dir=results: run from the shiftbench source folder, the default writes into its committed "
         "results/; accepted: results_dir=PATH (a folder of your own, or results_dir=results to regenerate "
         "the committed results on purpose)")


def fail(message: str) -> None:
    """Print a user error as one line and exit with status 2."""
    print(f"shiftbench: error: {message}", file=sys.stderr)
    raise SystemExit(2)


@hydra.main(version_base="1.3", config_path=str(CONFIG_DIR), config_name="config")
def _job(config: DictConfig) -> dict:
    hydra_config = HydraConfig.get()
    in_sweep = hydra_config.mode == RunMode.MULTIRUN
    overrides = list(OmegaConf.to_container(hydra_config.overrides.task))  # type: ignore[arg-type]
    keep_freed_memory()
    try:
        record = run_job(
            config,
            Path(hydra_config.sweep.dir) if in_sweep else None,
            overrides,
            live=sys.stdout.isatty() and not in_sweep,
            label=f"job {hydra_config.job.num}" if in_sweep else "",
        )
    except ConfigError as error:
        fail(str(error))
    if not in_sweep and record.get("status") == "failed":
        # The summary line above names the error; a script that runs one job must see it failed.
        raise SystemExit(1)
    # What the sweep progress callback shows for this job.
    metric = TASKS[record.get("task", "classification")].metric
    return {**{key: record.get(key) for key in ("status", "skipped", "family", "data")},
            "metric": metric, "test_score": record.get(f"test_{metric}")}


def main() -> None:
    catch_interrupts()
    if not CONFIG_DIR.is_dir():
        fail(f"config folder {CONFIG_DIR} not found; install shiftbench from its source tree (pip install -e .)")
    if any(argument in ("-h", "--help") for argument in sys.argv[1:]):
        print_help([argument for argument in sys.argv[1:] if not argument.startswith("-")])
        return
    if override_arguments(sys.argv[1:]) is not None:  # not --hydra-help and its kin
        refuse_committed_results(sys.argv[1:])
    if "hydra/launcher=slurm_cpu" in sys.argv[1:] and shutil.which("srun") is None:
        fail("hydra/launcher=slurm_cpu: no SLURM on this machine (srun not found); run with "
             "hydra/launcher=joblib here, or on a cluster's login node")
    try:
        checked = preflight(sys.argv[1:], CONFIG_DIR)
    except ConfigError as error:
        fail(str(error))
    for note in checked.notes:
        print(note, file=sys.stderr, flush=True)
    try:
        _job()
    except ValueError as error:  # Hydra's own refusals of a command line, e.g. two modes at once
        fail(str(error))
    except KeyboardInterrupt:
        print("shiftbench: interrupted; run the same command again to go on: finished jobs are kept and "
              "skipped, an interrupted one resumes from its last checkpoint", file=sys.stderr, flush=True)
        raise SystemExit(130) from None


def print_help(overrides: list[str]) -> None:
    from shiftbench.command_help import help_text

    quiet_on_closed_pipe()
    try:
        print(help_text(CONFIG_DIR, overrides), end="")
    except ConfigError as error:
        fail(str(error))


def quiet_on_closed_pipe() -> None:
    """Exit silently when the reader of our output goes away (``shiftbench-report ... | head``)."""
    signal.signal(signal.SIGPIPE, signal.SIG_DFL)


def report_main(arguments: list[str] | None = None) -> None:
    quiet_on_closed_pipe()
    parser = argparse.ArgumentParser(
        prog="shiftbench-report", description="Tabulate the records found under one or more folders."
    )
    parser.add_argument("paths", nargs="+", type=Path, help="launch folders, results folders (searched recursively) or record.json files")
    parser.add_argument("--out", type=Path, help="where to write the tables and plots (default: the first path)")
    parser.add_argument(
        "--where", action="append", default=[], metavar="KEY=VALUE", help="keep records with this field value (repeatable)"
    )
    parser.add_argument("--by", action="append", default=[], metavar="COLUMN", help="sort rows by this column (repeatable)")
    parser.add_argument("--curves", type=int, metavar="ROW", help="also plot the learning curves of this table row")
    options = parser.parse_args(arguments)
    missing = [str(path) for path in options.paths if not path.exists()]
    if missing:
        parser.exit(2, f"shiftbench-report: error: no such file or folder: {missing[0]}\n")
    out = options.out or (options.paths[0] if options.paths[0].is_dir() else options.paths[0].parent)
    from shiftbench.report import write_report  # here, not at import: the job entry point does not need it

    try:
        text = write_report(options.paths, out, options.where, options.by, options.curves)
    except ValueError as error:
        parser.exit(2, f"shiftbench-report: error: {error}\n")
    print(text)


def claims_main(arguments: list[str] | None = None) -> None:
    quiet_on_closed_pipe()
    parser = argparse.ArgumentParser(
        prog="shiftbench-claims", description="Check the textbook claims on the records under a folder."
    )
    parser.add_argument("path", type=Path, help="a study folder (the claims study writes what every claim needs)")
    parser.add_argument("--out", type=Path, help="where to write claims.json and claims.md (default: PATH)")
    parser.add_argument("--seeds", type=int, default=3, help="seeds for the claims computed here (default 3)")
    options = parser.parse_args(arguments)
    if not options.path.is_dir():
        what = "is a file, not a folder" if options.path.exists() else "no such folder"
        parser.exit(2, f"shiftbench-claims: error: {options.path}: {what}; accepted: a study folder (the claims "
                       "study's launch folder or a results folder)\n")
    if options.seeds < 1:
        parser.exit(2, f"shiftbench-claims: error: --seeds {options.seeds} is not accepted; accepted: an integer >= 1\n")
    from shiftbench.claims_report import write_claims  # here, not at import: jobs do not need it

    try:
        print(write_claims([options.path], options.out or options.path, tuple(range(options.seeds))))
    except ValueError as error:
        parser.exit(2, f"shiftbench-claims: error: {error}\n")


def decide_main(arguments: list[str] | None = None) -> None:
    catch_interrupts()
    """``shiftbench-decide [KEY=VALUE ...]``: the decision study (see :mod:`decision`)."""
    quiet_on_closed_pipe()
    arguments = sys.argv[1:] if arguments is None else arguments
    if any(a in ("-h", "--help") for a in arguments):
        print(DECIDE_HELP)
        return
    from shiftbench.decision import DecisionError
    from shiftbench.decision_study import run_study

    refuse_committed_results(arguments)
    try:
        print(run_study(arguments, CONFIG_DIR))
    except (ConfigError, DecisionError) as error:
        fail(str(error))
    except KeyboardInterrupt:
        print("shiftbench-decide: interrupted; run the same command again to go on: finished jobs are kept and "
              "skipped, an interrupted one resumes from its last checkpoint", file=sys.stderr, flush=True)
        raise SystemExit(130) from None


DECIDE_HELP = """usage: shiftbench-decide [KEY=VALUE ...]

Tune every candidate on equal budgets inside every outer fold, retrain it with several seeds per
fold, and answer two questions in pairs over the same folds: does a graph model beat the best
graph-free candidate, and does it beat itself on a degree-preserving rewiring of its graph?

  decision.KEY=VALUE   the study's settings (decision/settings.yaml): protocol (nested, tune_once),
                       trials, splits (outer folds), repetitions, seeds, tune_controls,
                       tuning_seeds, parallel_trials, storage, rope, alpha, sampler_seed,
                       folder, candidates, only (candidate names or families: fc,graph_conv,qda)
  data=A[,B...]        the dataset(s); several give a rank test across datasets
  hydra/launcher=NAME  where the jobs run, as for a sweep: basic (this process, the default),
                       joblib (hydra.launcher.n_jobs=2: local cores), submitit_local, slurm_cpu
  KEY=VALUE            any job override, given to every job (train.epochs=50, graph.neighbors=8)

Writes verdict.md, verdict.json, units.csv and plots to results_dir/decision (decision.folder)."""


def graph_check_main(arguments: list[str] | None = None) -> None:
    """``shiftbench-graph-check [KEY=VALUE ...]``: do the signals live on the graph? (see
    :mod:`shiftbench.graph_check`)."""
    quiet_on_closed_pipe()
    arguments = sys.argv[1:] if arguments is None else arguments
    if any(a in ("-h", "--help") for a in arguments):
        print(GRAPH_CHECK_HELP)
        return
    from shiftbench.graph_check import check_config

    rewirings = [a for a in arguments if a.startswith("--rewirings=")]
    arguments = [a for a in arguments if not a.startswith("--rewirings=")]
    count = rewirings[-1].split("=", 1)[1] if rewirings else "99"
    if not count.isdigit() or int(count) < 1:
        fail(f"--rewirings={count} is not accepted; accepted: an integer >= 1")
    try:
        check, written = check_config(arguments, CONFIG_DIR, int(count))
    except ConfigError as error:
        fail(str(error))
    print(written.read_text(), end="")
    print(f"wrote {written} and {written.with_suffix('.json')}", file=sys.stderr)


GRAPH_CHECK_HELP = """usage: shiftbench-graph-check [KEY=VALUE ...] [--rewirings=99]

Before any training: are the signals smoother on the graph than on degree-preserving rewirings
of it (Moran's I, Dirichlet energy), and do the classes differ in their graph-spectral content
(band energies, cross-validated logistic regression) more on it than on rewirings?

  data=NAME, data.*    the data, as for shiftbench (data=file data.path=... data.graph=...)
  graph=NAME, graph.*  the graph to check (default: the data's native graph)
  --rewirings=N        rewirings to compare with (default 99; the band-energy test uses 19)

Writes results_dir/graph_check/<data>_<graph>.md and .json. A check, not a verdict."""


def export_main(arguments: list[str] | None = None) -> None:
    """``shiftbench-export PATH... --out DIR``: records' curves as TensorBoard runs."""
    parser = argparse.ArgumentParser(
        prog="shiftbench-export", description="Write the records under folders as TensorBoard runs (one a record)."
    )
    parser.add_argument("paths", nargs="+", type=Path, help="launch folders, results folders or record.json files")
    parser.add_argument("--out", type=Path, required=True, help="the TensorBoard log folder to write the runs into")
    options = parser.parse_args(arguments)
    missing = [str(path) for path in options.paths if not path.exists()]
    if missing:
        parser.exit(2, f"shiftbench-export: error: no such file or folder: {missing[0]}\n")
    from shiftbench.export import export_tensorboard

    try:
        runs = export_tensorboard(options.paths, options.out)
    except ValueError as error:
        parser.exit(2, f"shiftbench-export: error: {error}\n")
    if not runs:
        parser.exit(2, f"shiftbench-export: error: no records under {' '.join(map(str, options.paths))}; accepted: "
                       "launch folders, results folders or record.json files that hold records\n")
    print(f"wrote {len(runs)} TensorBoard runs into {options.out}; view them with: tensorboard --logdir {options.out}")


def migrate_main(arguments: list[str] | None = None) -> None:
    """``shiftbench-migrate OLD_FOLDER RESULTS_DIR``: move records of the old layout into the store."""
    from shiftbench.store import migrate

    parser = argparse.ArgumentParser(
        prog="shiftbench-migrate",
        description="Move the records of an old results folder (result.json in job folders) into the store.",
    )
    parser.add_argument("old", type=Path, help="a folder of the old layout (a study or sweep folder)")
    parser.add_argument("results_dir", type=Path, help="the results_dir whose store receives them")
    options = parser.parse_args(arguments)
    if not options.old.is_dir():
        parser.exit(2, f"shiftbench-migrate: error: no such folder: {options.old}\n")
    moved, already = migrate(options.old, options.results_dir)
    print(f"moved {moved} records into {options.results_dir / 'store'}; {already} were there already; "
          f"{options.old} now points at their homes ({MANIFEST})")
