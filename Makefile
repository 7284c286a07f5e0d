# toposweep — `make help` lists the targets.
SHELL := /bin/bash
PYTHON ?= python3
VENV := .venv
PY := $(VENV)/bin/python
export VIRTUAL_ENV := $(abspath $(VENV))
# every .rs at any depth (make's wildcard does not recurse: `**` is `*`)
RUST_SOURCES := $(shell find src -name '*.rs') Cargo.toml
PY_DEPS := maturin numpy xarray h5netcdf h5py matplotlib pytest hypothesis ruff scipy colorspacious tqdm
# needed by the tests only (netCDF4: an outside reader of our files, the netCDF-C library;
# dask, distributed: the optional extra toposweep[dask], for the executor tests);
# a stamp of their own, so adding one installs it without rebuilding the extension
TEST_DEPS := netCDF4 dask distributed

# Compile for x86-64-v3 (AVX2, FMA, BMI2, ...) when the machine that builds has every feature of
# that level, as told by rustc itself: the kernels run about a fifth faster than at the baseline
# x86-64 level (DEVELOPERS.md, "Performance facts"), and the build then runs only on such CPUs.
# RUSTFLAGS set by the caller wins: `RUSTFLAGS= make build` gives a portable build.
# (rustc's names; python/toposweep/_cpu_check.py lists the same features by /proc/cpuinfo's names)
V3_FEATURES := avx avx2 bmi1 bmi2 f16c fma lzcnt movbe
ifeq ($(origin RUSTFLAGS),undefined)
  HOST_FEATURES := $(shell rustc --print cfg -C target-cpu=native 2>/dev/null \
                     | sed -n 's/^target_feature="\(.*\)"$$/\1/p')
  ifeq ($(filter-out $(HOST_FEATURES),$(V3_FEATURES)),)
    export RUSTFLAGS := -C target-cpu=x86-64-v3
  endif
endif

.DEFAULT_GOAL := help
.PHONY: FORCE help venv build demo test test-rust test-python bench lint fmt clean mutants

help: ## list the targets
	@grep -E '^[a-z-]+:.*## ' $(MAKEFILE_LIST) | awk -F':.*## ' '{printf "  make %-12s %s\n", $$1, $$2}'

$(VENV)/.deps: pyproject.toml
	$(PYTHON) -m venv $(VENV)
	$(PY) -m pip install --quiet --upgrade pip
	$(PY) -m pip install --quiet $(PY_DEPS)
	touch $@

venv: $(VENV)/.deps ## create .venv with the Python dependencies

# the flags of the last build: a change of RUSTFLAGS rebuilds the extension
$(VENV)/.rustflags: FORCE | $(VENV)/.deps
	@echo '$(RUSTFLAGS)' | cmp -s - $@ || echo '$(RUSTFLAGS)' > $@

$(VENV)/.built: $(VENV)/.deps $(VENV)/.rustflags $(RUST_SOURCES) pyproject.toml
	@# flock: two builds into one .venv at once would race over the staged library
	flock $(VENV)/.build-lock $(VENV)/bin/maturin develop --release --quiet
	@# read by toposweep/_cpu_check.py before the extension loads
	cp $(VENV)/.rustflags python/toposweep/_build_flags.txt
	touch $@

$(VENV)/.test-deps: FORCE | $(VENV)/.deps
	@echo '$(TEST_DEPS)' | cmp -s - $@ \
		|| { $(PY) -m pip install --quiet $(TEST_DEPS) && echo '$(TEST_DEPS)' > $@; }

build: $(VENV)/.built ## build the Rust extension (release) into .venv
	@echo "toposweep extension built with RUSTFLAGS='$(RUSTFLAGS)'"

demo: build ## sweep a fictional mixed-valence compound; writes demo-output/
	$(VENV)/bin/toposweep demo --out demo-output

test: test-rust test-python ## run cargo test and pytest (what CI runs)

test-rust: ## Rust unit tests of the numerical kernels
	cargo test --no-default-features --quiet

test-python: build $(VENV)/.test-deps ## pytest, doctests included
	$(PY) -m pytest -q tests python/toposweep --doctest-modules

# mutation testing tools, pinned (mutation/run.py says why these two)
MUTANTS_PY_TOOL := cosmic-ray==8.7.0
MUTANTS_RUST_TOOL := cargo-mutants

$(VENV)/.mutants-deps: | $(VENV)/.deps
	$(PY) -m pip install --quiet $(MUTANTS_PY_TOOL)
	touch $@

mutants: build $(VENV)/.test-deps $(VENV)/.mutants-deps ## mutation testing of indices, parity, flow, flags, models (long; niced; times per group in docs/mutants.md)
	@command -v cargo-mutants >/dev/null || cargo install --locked $(MUTANTS_RUST_TOOL)
	$(PY) mutation/run.py

bench: build ## benchmarks against plain NumPy; writes benches/RESULTS.md and the README table
	$(PY) benches/run_all.py --out benches/RESULTS.md --readme README.md

lint: venv ## cargo fmt --check, clippy -D warnings, ruff, folders used one way (.ci/check_layout.py)
	$(PY) .ci/check_layout.py
	cargo fmt --check
	cargo clippy --all-targets --no-default-features -- -D warnings
	cargo clippy --all-targets -- -D warnings
	$(VENV)/bin/ruff check python tests benches mutation .ci
	$(VENV)/bin/ruff format --check python tests benches mutation .ci

fmt: venv ## format Rust and Python sources
	cargo fmt
	$(VENV)/bin/ruff format python tests benches mutation .ci
	$(VENV)/bin/ruff check --fix python tests benches mutation .ci

clean: ## remove build products and the virtual environment
	cargo clean
	rm -rf $(VENV) python/toposweep/_core*.so python/toposweep/_build_flags.txt demo-output
