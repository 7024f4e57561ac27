"""One job: the data walk from a composed config to a written record.

config -> dataset -> graph -> shift operator -> family -> training -> record. A user error in the
config raises :class:`ConfigError` before any work; any failure after that becomes a record with
``status: failed`` so that the other jobs of a sweep go on.
"""

from __future__ import annotations

import json
import resource
import traceback
from datetime import datetime, timezone
from pathlib import Path
from typing import Any

import torch
from omegaconf import DictConfig

from shiftbench.cache import shared
from shiftbench.checkpoints import remove_checkpoint
from shiftbench.config import ConfigError, RunConfig, as_plain_dict, check_graph_fits, validate
from shiftbench.data import Dataset, load_dataset
from shiftbench.graphs import Graph, build_graph, operator_matrix, shift_operator
from shiftbench.models import build_model, count_parameters
from shiftbench.models.budget import WIDTH_KEY, fit_budget
from shiftbench.models.nearest import fit_nearest
from shiftbench.models.parameters import require_memory_for
from shiftbench.progress import EpochProgress
from shiftbench.records import FINAL_STATUSES, SCHEMA_VERSION, completed_index, config_hash, versions, write_curve, write_record
from shiftbench.runtime import available_memory_bytes
from shiftbench.training import Checkpointing, TrainingDiverged, TrainingResult, seed_everything, train


def check_inputs(run: RunConfig) -> None:
    """Read and check the user's files a job would use (a data file, a graph file), so a bad file
    stops a sweep before its first job. Other sources are checked by the config alone. Where
    the config tells the node count, a model too large to train is refused here too."""
    nodes = run.data.known_nodes()
    if nodes is not None and getattr(run.arch, "budget", None) is None:
        # One feature and the configured classes: the least the model could need.
        classes = getattr(run.data, "classes", 2)
        require_memory_for(run.arch, nodes, 1, classes, available_memory_bytes())
    uses_graph_file = run.arch.family == "graph_conv" and run.graph.source == "file"
    if run.data.source != "file" and not uses_graph_file:
        return
    dataset = shared("dataset", (run.data,), lambda: load_dataset(run.data))
    check_graph_fits(run.graph, run.arch.family, dataset.nodes)
    if uses_graph_file:
        operator_matrix(build_graph(run.graph, dataset), run.graph.operator)


def graph_notes(graph: Graph) -> list[str]:
    """What the record should say about the graph: input fixes and isolated nodes."""
    isolated = graph.isolated_nodes()
    notes = list(graph.notes)
    if isolated:
        shown = ", ".join(map(str, isolated[:10])) + (", ..." if len(isolated) > 10 else "")
        notes.append(f"{len(isolated)} isolated nodes ({shown})")
    return notes


def structure(run: RunConfig) -> tuple[str, str]:
    """The graph and shift operator a family actually uses: ``graph_conv`` the configured ones,
    ``line_conv`` the line graph's (or cycle's) delay, ``fc`` and ``nearest`` none."""
    if run.arch.family == "graph_conv":
        return run.graph.source, run.graph.operator
    if run.arch.family == "line_conv":
        return ("cycle" if run.arch.boundary == "circular" else "line"), "adjacency"
    return "none", "none"


def fit_family(
    run: RunConfig, dataset: Dataset, record: dict[str, Any], live: bool, checkpointing: Checkpointing | None = None
) -> TrainingResult:
    """Build and train the family ``run`` names on ``dataset`` (or fit the 1-NN floor), noting in
    ``record`` what the record reports about the model: parameters, budget, graph notes."""
    if run.arch.family == "nearest":
        record["parameters"] = 0
        return fit_nearest(dataset)
    shift = None
    if run.arch.family == "graph_conv":
        graph = shared("graph", (run.data, run.graph), lambda: build_graph(run.graph, dataset))
        record["graph_notes"] = graph_notes(graph)
        for note in record["graph_notes"]:
            print(f"note: graph {record['graph']}: {note}", flush=True)
        shift = shared("shift", (run.data, run.graph), lambda: shift_operator(graph, run.graph.operator, run.graph.scale))
    arch = run.arch
    if arch.budget is not None:
        record["budget"] = arch.budget
        arch, _ = fit_budget(arch, arch.budget, dataset.nodes, dataset.features, dataset.classes)
        record["sized_widths"] = getattr(arch, WIDTH_KEY[arch.family])
    require_memory_for(arch, dataset.nodes, dataset.features, dataset.classes, available_memory_bytes())
    seed_everything(run.seed)
    model = build_model(arch, dataset.nodes, dataset.features, dataset.classes, shift)
    record["parameters"] = count_parameters(model)
    progress = EpochProgress(run.train.epochs, live)
    try:
        return train(model, dataset, run.train, run.seed, run.device, on_epoch=progress, checkpointing=checkpointing)
    finally:
        progress.close()


def run_job(
    config: DictConfig, output_dir: Path, overrides: list[str], live: bool, search_root: Path | None = None
) -> dict[str, Any]:
    """Validate ``config``, run the job, write ``result.json`` and ``curve.csv`` into ``output_dir``,
    print one summary line, and return the record.

    When a completed record with the same config hash lies under ``search_root`` (default
    ``output_dir``: for a sweep, its folder), the job is skipped with a note and that record is
    returned with ``skipped: true``, unless ``force`` is set. Failed records are retried.
    """
    run = validate(config)
    plain = as_plain_dict(run)
    digest = config_hash(plain)
    index = completed_index(search_root or output_dir)
    done = None if run.force else index.find(digest)
    if done is not None:
        previous = json.loads(done.read_text(encoding="utf-8"))
        print(f"skipped (already completed): {summary_line(previous)}", flush=True)
        return {**previous, "skipped": True}
    graph_name, operator = structure(run)
    record: dict[str, Any] = {
        "schema_version": SCHEMA_VERSION,
        "status": "failed",
        "error": None,
        "config": plain,
        "overrides": overrides,
        "config_hash": digest,
        "family": run.arch.family,
        "graph": graph_name,
        "operator": operator,
        "data": getattr(run.data, "name", run.data.source),
        "nodes": None,
        "order": getattr(run.arch, "order", None),
        "seed": run.seed,
        "parameters": None,
        "started": datetime.now(timezone.utc).isoformat(timespec="seconds"),
    }
    curve: list[dict[str, float]] = []
    try:
        dataset = shared("dataset", (run.data,), lambda: load_dataset(run.data))
        check_graph_fits(run.graph, run.arch.family, dataset.nodes)
        record["nodes"] = dataset.nodes
        record["data"] = dataset.name
        checkpointing = Checkpointing(output_dir, run.train.checkpoint_every, digest)
        result = fit_family(run, dataset, record, live, checkpointing)
        curve = result.curve
        if result.resumed_from_epoch is not None:
            record["resumed_from_epoch"] = result.resumed_from_epoch
            print(f"resumed from the checkpoint of epoch {result.resumed_from_epoch - 1}", flush=True)
        record.update(
            status=result.status,
            train_accuracy=result.train_accuracy,
            val_accuracy=result.val_accuracy,
            test_accuracy=result.test_accuracy,
            test_loss=result.test_loss,
            best_epoch=result.best_epoch,
            epochs_run=result.epochs_run,
            train_seconds=result.train_seconds,
            samples_per_second=result.samples_per_second,
        )
    except ConfigError:
        raise
    except TrainingDiverged as error:
        record["error"] = f"{type(error).__name__}: {error}"
        record["failed_epoch"] = error.epoch
    except Exception as error:  # a failed job is recorded, never lost, and the sweep goes on
        record["error"] = f"{type(error).__name__}: {error}"
        record["traceback"] = traceback.format_exc()
    record["peak_rss_mb"] = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    record["versions"] = versions()
    record["finished"] = datetime.now(timezone.utc).isoformat(timespec="seconds")
    write_curve(output_dir, curve)
    path = write_record(output_dir, record)
    if record["status"] in FINAL_STATUSES:
        index.add(record["config_hash"], path)
        remove_checkpoint(output_dir)
    print(summary_line(record), flush=True)
    return record


def summary_line(record: dict[str, Any]) -> str:
    """One line per job: family, data, graph, order, parameters, test accuracy (or the failure)."""
    order = "-" if record["order"] is None else record["order"]
    head = f"{record['family']} on {record['data']}, graph {record['graph']}, order {order}"
    if record["status"] not in FINAL_STATUSES:
        return f"{head}: FAILED: {record['error']}"
    epochs = "" if record["epochs_run"] is None else f"best epoch {record['best_epoch']} of {record['epochs_run']}, "
    if record["status"] == "timed_out":
        epochs = f"timed out (train.max_seconds), {epochs}"
    return (
        f"{head}: {record['parameters']:,} parameters, test accuracy {record['test_accuracy']:.3f} "
        f"({epochs}{record['train_seconds']:.1f} s)"
    )

