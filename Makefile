# Posewright: the two quick-start commands (`make run`, `make test`) and the benchmarks.
# Each target sets up .venv first (created if missing, refreshed when pyproject.toml changes).

PYTHON ?= python3
VENV   := .venv
BIN    := $(VENV)/bin
RUN_STAMP  := $(VENV)/.installed-run
TEST_STAMP := $(VENV)/.installed-test
export QT_QPA_PLATFORM ?= $(if $(DISPLAY)$(WAYLAND_DISPLAY),,offscreen)

.PHONY: run test bench lint demo clean

$(BIN)/python:
	$(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip

$(RUN_STAMP): pyproject.toml | $(BIN)/python
	$(BIN)/python -m pip install --quiet -e .
	touch $@

$(TEST_STAMP): pyproject.toml | $(BIN)/python
	$(BIN)/python -m pip install --quiet -e '.[test,dev]'
	touch $@ $(RUN_STAMP)

# With a display the app opens on the demo project. Without one (a server, CI) the app still
# loads the project and shows its most suspicious frame, but renders the window to a file and
# exits instead of running invisibly.
run: $(RUN_STAMP)
ifeq ($(strip $(DISPLAY)$(WAYLAND_DISPLAY)),)
	$(BIN)/posewright open demo_project --screenshot demo-window.png
	@echo "No display here: the app rendered its window to demo-window.png and closed."
	@echo "On a desktop, 'make run' opens the app; on a server try 'xvfb-run -a make run'."
else
	$(BIN)/posewright open demo_project
endif

test: $(TEST_STAMP)
	QT_QPA_PLATFORM=offscreen $(BIN)/python -m pytest -n auto

bench: $(TEST_STAMP)
	QT_QPA_PLATFORM=offscreen $(BIN)/python -m tests.benchmarks.run

lint: $(TEST_STAMP)
	$(BIN)/ruff check app tests
	$(BIN)/mypy app/model app/analysis app/store app/formats

demo: $(RUN_STAMP)
	rm -rf demo_project/images demo_project/maps demo_project/project.db*
	$(BIN)/posewright demo demo_project --force

clean:
	rm -rf $(VENV) .pytest_cache .mypy_cache .ruff_cache .hypothesis bench-results.json
