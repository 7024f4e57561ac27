"""The data walk goes one way: a module imports only modules of its own stage or earlier ones
(config -> dataset -> graph source -> family -> training -> record -> report), function-local
imports included. Read from the source with Python's ast module (common practice, no source)."""

import ast
from pathlib import Path

PACKAGE = Path(__file__).resolve().parents[2] / "src" / "shiftbench"

# Each module's stage, by the longest matching prefix of its dotted name.
STAGES = {
    "shiftbench": 0,  # the package itself: version only
    "shiftbench.errors": 0,
    "shiftbench.registry": 0,
    "shiftbench.config": 1,
    "shiftbench.csv_input": 1,
    "shiftbench.npz_input": 1,
    "shiftbench.runtime": 1,
    "shiftbench.cache": 1,
    "shiftbench.records": 1,
    "shiftbench.input_files": 1,
    "shiftbench.task": 2,
    "shiftbench.graphs.graph": 2,
    "shiftbench.graphs.standard": 2,
    "shiftbench.graphs.operators": 2,
    "shiftbench.graphs.files": 2,  # signal files carry their graph file (data.graph)
    "shiftbench.data": 3,
    "shiftbench.graphs": 4,
    "shiftbench.training_result": 5,
    "shiftbench.models": 5,
    "shiftbench.checkpoints": 6,
    "shiftbench.progress": 6,
    "shiftbench.training": 6,
    "shiftbench.store": 7,
    "shiftbench.sweep_axes": 7,
    "shiftbench.config_store": 7,
    "shiftbench.job": 8,
    "shiftbench.spectral": 9,
    "shiftbench.robustness": 9,
    "shiftbench.plots": 9,
    "shiftbench.report": 9,
    "shiftbench.export": 9,
    "shiftbench.sweep_progress": 9,
    "shiftbench.batch": 9,
    "shiftbench.graph_check": 9,
    "shiftbench.preflight": 9,
    "shiftbench.command_help": 9,
    "shiftbench.claims": 10,
    "shiftbench.claims_report": 10,
    "shiftbench.statistics": 1,
    "shiftbench.decision_plots": 9,
    "shiftbench.decision": 10,
    "shiftbench.decision_protocol": 10,
    "shiftbench.verdict": 10,
    "shiftbench.decision_study": 10,
    "shiftbench.tuning_storage": 10,
    "shiftbench.cli": 11,
}


def stage(module: str) -> int:
    """The module's stage; a module of the package that no entry names has none, and fails."""
    matches = [name for name in STAGES if module == name or module.startswith(name + ".")]
    best = max(matches, key=len)
    assert best != "shiftbench" or module == "shiftbench", f"{module} has no stage: add it to STAGES"
    return STAGES[best]


def module_name(path: Path) -> str:
    parts = path.relative_to(PACKAGE.parent).with_suffix("").parts
    return ".".join(parts[:-1] if parts[-1] == "__init__" else parts)


def imports(path: Path) -> set[str]:
    found = set()
    for node in ast.walk(ast.parse(path.read_text())):
        if isinstance(node, ast.Import):
            found.update(alias.name for alias in node.names)
        elif isinstance(node, ast.ImportFrom) and node.module:
            found.add(node.module)
            found.update(f"{node.module}.{alias.name}" for alias in node.names if node.module == "shiftbench" or
                         (PACKAGE.parent / (node.module + "." + alias.name).replace(".", "/")).exists() or
                         (PACKAGE.parent / ((node.module + "." + alias.name).replace(".", "/") + ".py")).exists())
    return {name for name in found if name.split(".")[0] == "shiftbench"}


def back_references() -> list[str]:
    problems = []
    for path in sorted(PACKAGE.rglob("*.py")):
        importer = module_name(path)
        for imported in imports(path):
            if stage(imported) > stage(importer):
                problems.append(f"{importer} (stage {stage(importer)}) imports {imported} (stage {stage(imported)})")
    return problems


def test_no_module_imports_a_later_stage_of_the_walk():
    assert back_references() == []


def test_the_config_layer_imports_only_the_registry_and_the_error_type():
    assert imports(PACKAGE / "config.py") == {"shiftbench.errors", "shiftbench.registry"}


def test_counting_a_sweeps_jobs_does_not_load_the_job_runner():
    assert not any(name.startswith(("shiftbench.job", "shiftbench.preflight")) for name in imports(PACKAGE / "sweep_progress.py"))


def test_the_nearest_floor_does_not_import_the_training_loop():
    assert "shiftbench.training" not in imports(PACKAGE / "models" / "nearest.py")


def test_a_planted_back_reference_is_caught(tmp_path, monkeypatch):
    # The check itself can fail: a data module importing a model is reported.
    planted = PACKAGE / "data" / "_planted_for_test.py"
    planted.write_text("from shiftbench.models import build_model\n")
    try:
        assert back_references() == ["shiftbench.data._planted_for_test (stage 3) imports shiftbench.models (stage 5)"]
    finally:
        planted.unlink()


def test_the_command_line_and_every_component_load_without_the_heavy_libraries():
    # Start-up: scikit-learn, pandas, networkx and matplotlib cost about as much as torch to
    # import; modules on the job path import them inside the functions that use them.
    import subprocess
    import sys

    probe = ("import sys, shiftbench.cli; from shiftbench.registry import load_components; load_components(); "
             "print(sorted(name for name in ('sklearn', 'pandas', 'networkx', 'matplotlib') if name in sys.modules))")
    done = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True, check=True)
    assert done.stdout.strip() == "[]"
