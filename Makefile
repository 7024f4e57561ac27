# Three commands: `make run` (the families study and its table), `make test`, and `make bench`
# (layer, end-to-end and decision-study benchmarks, written to results/benchmarks/).
# Both create .venv when it is missing and install the CPU build of torch before the package,
# so that no dependency pulls a CUDA build.
PYTHON ?= python3
VENV := .venv
BIN := $(VENV)/bin
STAMP := $(VENV)/.shiftbench-installed

.PHONY: setup run test bench clean

$(BIN)/python:
	$(PYTHON) -m venv $(VENV)

$(STAMP): pyproject.toml | $(BIN)/python
	$(BIN)/python -m pip install --quiet --upgrade pip
	$(BIN)/python -m pip install --quiet torch==2.13.0
	$(BIN)/python -m pip install --quiet -e '.[dev,ucr,tracking,regions]'
	touch $(STAMP)

setup: $(STAMP)

run: setup
	$(BIN)/shiftbench -m +experiment=families results_dir=results
	$(BIN)/shiftbench-report results/families

test: setup
	$(BIN)/python -m pytest -q -n 2 --dist worksteal

bench: setup
	$(BIN)/python -m benchmarks.layers
	$(BIN)/python -m benchmarks.end_to_end
	$(BIN)/python -m benchmarks.decision
	$(BIN)/python -m benchmarks.null_share
	$(BIN)/python -m benchmarks.memory
	$(BIN)/python -m benchmarks.startup
	$(BIN)/python -m benchmarks.contention

clean:
	rm -rf $(VENV) results/store results/sweeps results/families/jobs.jsonl
