# icefold: one-word entry points. `make demo` and `make test` do all set-up on a fresh machine.

CARGO ?= cargo
VENV := .venv
PY := $(VENV)/bin/python
BIN := target/release/icefold
## The command-line tool built with the whole workspace and the Python package's build environment,
## so that it shares every compiled crate with the package (scripts/ensure-python-env.sh).
BUILD_WITH_PACKAGE = env $$(scripts/ensure-python-env.sh --cargo-env) $(CARGO) build --release --workspace

.PHONY: demo test test-rust test-python deps pyenv build bench bench-compare gallery clippy fmt clean

## Install what is missing (HDF5 C library, pkg-config), build, run the built-in demo into
## icefold-demo/ (ignored by git, so a fresh clone stays clean; `make gallery` regenerates the
## tracked copies in outputs-demo/).
demo: deps
	$(CARGO) run --release -- demo --out-dir icefold-demo

## Every test: Rust unit and integration tests, then the Python reference checks and the tests of
## the Python package (built and installed into .venv by `pyenv`).
test: deps pyenv
	$(BUILD_WITH_PACKAGE)
	$(CARGO) test --release
	ICEFOLD_BIN=$(CURDIR)/$(BIN) $(PY) -m pytest -q tests/python

test-rust: deps
	$(CARGO) test --release

test-python: deps pyenv
	$(BUILD_WITH_PACKAGE)
	ICEFOLD_BIN=$(CURDIR)/$(BIN) $(PY) -m pytest -q tests/python

## Regenerate outputs-demo/: the demo and a file and pictures from every example config.
gallery: deps
	$(CARGO) build --release
	ICEFOLD_BIN=$(CURDIR)/$(BIN) scripts/make-gallery.sh outputs-demo

deps:
	@scripts/ensure-system-deps.sh

## The Python environment .venv with the reference libraries and the `icefold` package (python/).
pyenv: deps
	@scripts/ensure-python-env.sh

build: deps
	$(CARGO) build --release

## Every benchmark (criterion, short measurement times; benches/workloads.rs runs the workloads
## that take minutes once each, as whole processes), then one table of the figures with their
## arithmetic lower bounds (benches/summary.py, Python standard library only).
bench: deps
	$(CARGO) bench
	python3 benches/summary.py

## icefold against a plain numpy/scipy implementation on the same workloads, with ratios
## (the regime map and the 100,000-member ensemble: numpy/scipy timed on a part, scaled up).
bench-compare: deps pyenv build
	$(PY) benches/reference/compare.py --icefold $(CURDIR)/$(BIN)

clippy:
	$(CARGO) clippy --all-targets -- -D warnings

fmt:
	$(CARGO) fmt --all

clean:
	$(CARGO) clean
	rm -rf $(VENV)
