"""One job: the data walk from a composed config to a written record.

config -> dataset -> graph -> shift operator -> family -> training -> record, in the config's
home in the store. A user error in the config raises :class:`ConfigError` before any work; any
failure after that becomes a record with ``status: failed`` so that the other jobs of a sweep go
on. ``run_job`` reads as: skip, new record, execute, finish.
"""

from __future__ import annotations

import contextlib
import io
import traceback
from collections.abc import Callable
from dataclasses import dataclass, field
from datetime import datetime, timezone
from pathlib import Path
from typing import Any, TYPE_CHECKING

import numpy as np
import torch
from omegaconf import DictConfig

from shiftbench.cache import Built, shared
from shiftbench.checkpoints import remove_checkpoint
from shiftbench.config import ConfigError, RunConfig, check_graph_fits, validate
from shiftbench.data import Dataset, load_dataset
from shiftbench.graphs import Graph, build_graph, operator_matrix, shift_operator
from shiftbench.input_files import input_digests, job_content
from shiftbench.models import build_model, count_parameters
from shiftbench.models.budget import fit_budget, width_key
from shiftbench.models.parameters import require_memory_for
from shiftbench.progress import EpochProgress
from shiftbench.records import (
    FINAL_STATUSES, Record, config_hash, versions, write_curve, write_predictions, write_record, write_weights,
)
from shiftbench.registry import FAMILIES, TASKS
from shiftbench.runtime import available_memory_bytes, peak_memory_mb, raise_if_interrupted, start_peak_memory
from shiftbench.store import (
    claim, clear_torn_writes, finished_record, heartbeat, home_of, note_launch, release, require_plain_home, require_writable_home,
    set_aside,
)
from shiftbench.training import Checkpointing, TrainingDiverged, TrainingResult, seed_everything, train

if TYPE_CHECKING:
    import pandas as pd


def shared_for(run: RunConfig, what: str, configs: tuple[Any, ...], build: Callable[[], Built]) -> Built:
    """``build()``'s result shared by the jobs of this process with the same ``configs``, split
    and input files (by content: a file changed between two jobs is read again)."""
    files = ",".join(f"{key}={digest}" for key, digest in input_digests(run).items())
    return shared(f"{what}/{run.folds}folds/split{run.split}/{files}", configs, build)


def load_data(run: RunConfig) -> Dataset:
    """The run's dataset under its split, shared by the jobs of this process; a one-line error
    when its targets are not what the run's task learns (a user's file of another kind)."""
    dataset = shared_for(run, "dataset", (run.data,), lambda: load_dataset(run.data, run.split, run.folds))
    task = TASKS[run.task]
    if not task.fits(dataset.labels, dataset.nodes):
        where = f"data.path={run.data.path!r}" if run.data.source == "file" else f"data={run.data.source}"
        raise ConfigError(
            f"task={run.task} is not accepted for {where}, whose targets have shape {dataset.labels.shape} "
            f"({dataset.labels.dtype}); accepted: a task that learns them, or {task.targets} for task={run.task}"
        )
    require_targets_in_every_split(run, dataset)
    return dataset


def target_entries(labels: np.ndarray) -> int:
    """How many entries of ``labels`` are targets: not NaN (values), not -1 (classes on nodes).
    Shapes: ``(samples,)``, ``(samples, nodes)`` or ``(samples[, nodes], outputs)``."""
    return int(np.count_nonzero(~np.isnan(labels))) if labels.dtype.kind == "f" else int(np.count_nonzero(labels >= 0))


def require_targets_in_every_split(run: RunConfig, dataset: Dataset) -> None:
    """Each split that has samples must hold a target: a split without one trains on nothing or
    scores NaN (a file whose test nodes are all -1, or whose mask is False on every test row)."""
    for part, indices in (("train", dataset.splits.train), ("validation", dataset.splits.val), ("test", dataset.splits.test)):
        if len(indices) and target_entries(dataset.labels[indices]) == 0:
            where = f"data.path={run.data.path!r}" if run.data.source == "file" else f"data={run.data.source}"
            raise ConfigError(f"{where}: the {part} split ({len(indices)} samples) holds no targets (every entry is "
                              f"unmarked: -1 or NaN, or masked out); accepted: data with targets in every split")


def check_inputs(run: RunConfig) -> None:
    """Read and check the user's files a job would use (a data file, a graph file), so a bad file
    stops a sweep before its first job; with outer folds, the data is loaded to check it can give
    them. Other sources are checked by the config alone. Where the config tells the node count,
    a model too large to train is refused here too."""
    nodes, samples = run.data.known_nodes(), run.data.known_samples()
    if nodes is not None and getattr(run.arch, "budget", None) is None:
        # One feature and the configured classes: the least the job could need.
        classes = getattr(run.data, "classes", 2)
        require_memory_for(run.arch, nodes, 1, classes, run.train.batch_size, samples or 0, available_memory_bytes())
    uses_graph = FAMILIES[run.arch.family].uses_graph
    if run.data.source != "file" and not (uses_graph and run.graph.source == "file") and not run.folds:
        return
    dataset = load_data(run)
    check_graph_fits(run.graph, run.arch.family, dataset.nodes)
    if uses_graph:  # the operator against the graph's weights (a Laplacian of negative weights)
        graph = shared_for(run, "graph", (run.data, run.graph), lambda: build_graph(run.graph, dataset))
        operator_matrix(graph, run.graph.operator)


def graph_notes(graph: Graph) -> list[str]:
    """What the record should say about the graph: input fixes and isolated nodes."""
    isolated = graph.isolated_nodes()
    notes = list(graph.notes)
    if isolated:
        shown = ", ".join(map(str, isolated[:10])) + (", ..." if len(isolated) > 10 else "")
        notes.append(f"{len(isolated)} isolated nodes ({shown})")
    return notes


def structure(run: RunConfig) -> tuple[str, str]:
    """The graph and shift operator a family actually uses: the configured ones for a family
    that reads the graph, else what the family states (``line_conv``: the line graph's delay;
    graph-free families: ``none``)."""
    family = FAMILIES[run.arch.family]
    if family.uses_graph:
        return run.graph.source, run.graph.operator
    return family.structure(run.arch)


def fit_family(
    run: RunConfig, dataset: Dataset, record: Record, live: bool, checkpointing: Checkpointing | None = None,
    label: str = "",
) -> TrainingResult:
    """Build and train the family ``run`` names on ``dataset`` (or fit a floor), noting in
    ``record`` what the record reports about the model: parameters, budget, graph notes."""
    family = FAMILIES[run.arch.family]
    if family.fit is not None:
        record.parameters = 0
        return family.fit(run.arch, dataset, run.seed, TASKS[run.task])
    shift = None
    if family.uses_graph:
        key = (run.data, run.graph)
        graph = shared_for(run, "graph", key, lambda: build_graph(run.graph, dataset))
        record.graph_name = graph.name
        record.graph_notes = graph_notes(graph)
        for note in record.graph_notes:
            print(f"note: graph {record.graph}: {note}", flush=True)
        shift = shared_for(run, "shift", key, lambda: shift_operator(graph, run.graph.operator, run.graph.scale))
    arch, head = run.arch, TASKS[run.task].head
    if getattr(arch, "budget", None) is not None:
        record.budget = arch.budget
        arch, _ = fit_budget(arch, arch.budget, dataset.nodes, dataset.features, dataset.classes, head)
        record.sized_widths = getattr(arch, width_key(arch.family))
    require_memory_for(
        arch, dataset.nodes, dataset.features, dataset.classes, run.train.batch_size, dataset.samples,
        available_memory_bytes(), head,
    )
    seed_everything(run.seed)
    model = build_model(arch, dataset.nodes, dataset.features, dataset.classes, shift, head)
    record.parameters = count_parameters(model)
    progress = EpochProgress(run.train.epochs, live, label=label)
    try:
        return train(
            model, dataset, run.train, run.seed, run.device, on_epoch=progress, checkpointing=checkpointing,
            task=TASKS[run.task],
        )
    finally:
        progress.close()


def new_record(run: RunConfig, plain: dict[str, Any], digest: str, overrides: list[str]) -> Record:
    """The record of a job about to run: what it is, nothing measured yet."""
    graph_name, operator = structure(run)
    return Record(
        config=plain,
        overrides=overrides,
        config_hash=digest,
        family=run.arch.family,
        graph=graph_name,
        operator=operator,
        data=getattr(run.data, "name", run.data.source),
        order=getattr(run.arch, "order", None),
        seed=run.seed,
        split=run.split,
        folds=run.folds or None,
        task=run.task,
        started=datetime.now(timezone.utc).isoformat(timespec="seconds"),
    )


@dataclass
class JobOutputs:
    """What a job leaves beside its record: the learning curve, the test predictions and a
    network's final weights (empty or None where the job did not reach them)."""

    curve: list[dict[str, float]] = field(default_factory=list)
    predictions: pd.DataFrame | None = None
    weights: dict[str, np.ndarray] | None = None


def judge(run: RunConfig, dataset: Dataset, record: Record, result: TrainingResult) -> pd.DataFrame:
    """Fill ``record`` with the task's further figures and flags; return the test predictions
    as a table (``sample`` indexes the dataset): ``sample, label, predicted`` for a class per
    signal (with ``label_name, predicted_name`` where the data names its classes), ``sample, node, label, predicted`` for each scored node of a class per node, and
    ``sample, [node,] output, target, predicted`` for each scored entry of a regression task."""
    import pandas as pd

    test, train = dataset.splits.test, dataset.splits.train
    judged = TASKS[run.task].judge(dataset.labels[test], result.test_predictions, dataset.labels[train], result.curve)
    for key, value in judged.items():
        setattr(record, key, value)
    if dataset.labels.ndim == 1:
        table = pd.DataFrame({"sample": test, "label": dataset.labels[test], "predicted": result.test_predictions})
        if dataset.class_names and "confusion_matrix" in judged:
            # The codes stay (they index the confusion matrix); the names say what they stand for.
            record.class_names = list(dataset.class_names)
            names = np.asarray(dataset.class_names, dtype=object)
            table["label_name"], table["predicted_name"] = names[table["label"]], names[table["predicted"]]
        return table
    targets = dataset.labels[test]
    if targets.dtype.kind in "iu":  # classes on every node, -1 where not a target
        sample, node = np.nonzero(targets >= 0)
        return pd.DataFrame({"sample": test[sample], "node": node, "label": targets[sample, node],
                             "predicted": result.test_predictions[sample, node]})
    scored = np.nonzero(~np.isnan(targets))  # (sample, output) or (sample, node, output) indices
    columns = {"sample": test[scored[0]], "node": scored[1] if targets.ndim == 3 else None, "output": scored[-1],
               "target": targets[scored], "predicted": result.test_predictions[scored]}
    return pd.DataFrame({key: value for key, value in columns.items() if value is not None})


def execute(run: RunConfig, record: Record, home: Path, live: bool, label: str = "", in_sweep: bool = False) -> JobOutputs:
    """Load the data, fit the family and fill ``record`` with what it measured; a failure after
    validation is noted in the record, never raised (the other jobs of a sweep go on). A
    refusal that needs the data (a budget no width meets, a model too large for it) is raised
    for a single job, and noted as the job's failure in a sweep. ``label`` starts the job's
    epoch lines."""
    torch.set_num_threads(run.threads)
    try:
        dataset = load_data(run)
        check_graph_fits(run.graph, run.arch.family, dataset.nodes)
        record.nodes = dataset.nodes
        record.data = dataset.name
        checkpointing = Checkpointing(home, run.train.checkpoint_every, record.config_hash)
        result = fit_family(run, dataset, record, live, checkpointing, label=label)
        if result.resumed_from_epoch is not None:
            record.resumed_from_epoch = result.resumed_from_epoch
            print(f"resumed at epoch {result.resumed_from_epoch} (the checkpoint holds epochs 1 to "
                  f"{result.resumed_from_epoch - 1})", flush=True)
        record.status = result.status
        metric = TASKS[run.task].metric
        for split in ("train", "val", "test"):
            setattr(record, f"{split}_{metric}", getattr(result, f"{split}_score"))
        record.test_loss = result.test_loss
        record.best_epoch = result.best_epoch
        record.epochs_run = result.epochs_run
        record.train_seconds = result.train_seconds
        record.train_cpu_seconds = result.train_cpu_seconds
        record.samples_per_second = result.samples_per_second
        record.inference_seconds_per_sample = result.inference_seconds_per_sample
        record.chosen = result.chosen
        predictions = judge(run, dataset, record, result) if result.test_predictions is not None else None
        return JobOutputs(result.curve, predictions, result.weights)
    except ConfigError as error:
        if not in_sweep:
            raise
        record.error = f"ConfigError: {error}"
    except TrainingDiverged as error:
        record.error = f"{type(error).__name__}: {error}"
        record.failed_epoch = error.epoch
    except Exception as error:  # a failed job is recorded, never lost, and the sweep goes on
        record.error = f"{type(error).__name__}: {error}"
        record.traceback = traceback.format_exc()
    return JobOutputs()


def finish(record: Record, home: Path, outputs: JobOutputs) -> Path:
    """Write the curve, predictions, weights and, last, the record into the job's home; a
    finished job leaves no checkpoint."""
    record.peak_rss_mb = peak_memory_mb()
    record.torch_threads = torch.get_num_threads()
    record.versions = versions()
    record.finished = datetime.now(timezone.utc).isoformat(timespec="seconds")
    write_curve(home, outputs.curve, TASKS[record.task].metric)
    if outputs.predictions is not None:
        write_predictions(home, outputs.predictions)
    if outputs.weights is not None:
        write_weights(home, outputs.weights)
    path = write_record(home, record.as_dict())
    if record.status in FINAL_STATUSES:
        remove_checkpoint(home)
    return path


def run_job(
    config: DictConfig, launch: Path | None, overrides: list[str], live: bool, quiet: bool = False, label: str = ""
) -> dict[str, Any]:
    """Validate ``config`` and run its job in its home in the store (``results_dir/store/<hash>``),
    then print one summary line and return the record; ``launch`` (a sweep's or study's folder)
    gets a pointer to the home.

    A config whose record is completed (or timed out) is skipped, unless ``force`` is set, which
    sets the old record aside first; a config another live process has claimed is skipped too
    (it is not trained twice); an interrupted one resumes from its checkpoint. ``label`` (a
    sweep's ``job 3``) starts the job's epoch lines.
    """
    raise_if_interrupted()
    run = validate(config)
    plain = job_content(run)
    digest = config_hash(plain)
    home = home_of(Path(run.results_dir), digest)
    require_plain_home(home)

    def skip(previous: dict[str, Any], outcome: str, why: str) -> dict[str, Any]:
        if launch is not None:
            note_launch(launch, home, digest, overrides, outcome)
        if not quiet:
            print(f"skipped ({why}): {summary_line(previous)}", flush=True)
        return {**previous, "skipped": True}

    done = None if run.force else finished_record(home)
    if done is not None:
        return skip(done, "skipped", f"already completed, record in {home}")
    require_writable_home(home)
    holder = claim(home)
    if holder is not None:
        pending = new_record(run, plain, digest, overrides).as_dict()
        return skip({**pending, "status": "claimed", "holder": holder}, "claimed", f"being trained by {holder}; its record will be in {home}")
    try:
        clear_torn_writes(home)
        done = None if run.force else finished_record(home)  # finished while we were claiming
        if done is not None:
            return skip(done, "skipped", f"already completed, record in {home}")
        if run.force and (aside := set_aside(home)) is not None:
            print(f"force: the earlier record is kept in {aside}", flush=True)
        record = new_record(run, plain, digest, overrides)
        record.peak_rss_scope = start_peak_memory()
        with heartbeat(home), contextlib.redirect_stdout(io.StringIO()) if quiet else contextlib.nullcontext():
            outputs = execute(run, record, home, live, label, in_sweep=launch is not None)
        finish(record, home, outputs)
    finally:
        release(home)
    if launch is not None:
        outcome = "failed" if record.status not in FINAL_STATUSES else "resumed" if record.resumed_from_epoch else "trained"
        note_launch(launch, home, digest, overrides, outcome)
    written = record.as_dict()
    if not quiet:
        print(summary_line(written), flush=True)
    return written


def summary_line(record: dict[str, Any]) -> str:
    """One line per job: family, data, graph, order, parameters, the test figure of the task's
    metric (or the failure)."""
    order = "-" if record["order"] is None else record["order"]
    head = f"{record['family']} on {record['data']}, graph {record['graph']}, order {order}"
    if record["status"] == "claimed":
        return f"{head}: being trained by another process"
    if record["status"] not in FINAL_STATUSES:
        return f"{head}: FAILED: {record['error']}"
    epochs = "" if record["epochs_run"] is None else f"best epoch {record['best_epoch']} of {record['epochs_run']}, "
    if record["status"] == "timed_out":
        epochs = f"timed out (train.max_seconds), {epochs}"
    metric = TASKS[record.get("task", "classification")].metric
    return (
        f"{head}: {record['parameters']:,} parameters, test {metric} {record[f'test_{metric}']:.3f} "
        f"({epochs}{record['train_seconds']:.1f} s)"
    )

