# procmetrics: the two README commands are `make demo` and `make test`.
PYTHON ?= python3
VENV   := .venv
BIN    := $(VENV)/bin
DEMO_REPO  := sample_repos/build/aurora-fw
DEMO_OUT   := reports/demo
DEMO_STORE := $(DEMO_OUT)/procmetrics.sqlite

.PHONY: demo test setup setup-test system-test-deps bench clean

$(BIN)/python:
	$(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip

$(VENV)/.installed: $(BIN)/python pyproject.toml
	$(BIN)/python -m pip install --quiet -e .
	touch $@

$(VENV)/.installed-test: $(VENV)/.installed
	$(BIN)/python -m pip install --quiet -e '.[test]'
	touch $@

setup: $(VENV)/.installed

setup-test: $(VENV)/.installed-test system-test-deps

# Debian packages the tests use: chromium (report rendering) and postgresql (team store).
system-test-deps:
	@sh .ci/system-deps

$(DEMO_REPO)/HEAD $(DEMO_REPO)/.git/HEAD: $(VENV)/.installed sample_repos/generate.py
	$(BIN)/python sample_repos/generate.py --out $(DEMO_REPO)

demo: $(VENV)/.installed
	$(BIN)/python sample_repos/generate.py --out $(DEMO_REPO)
	@mkdir -p $(DEMO_OUT)
	$(BIN)/procmetrics mine $(DEMO_REPO) --store $(DEMO_STORE)
	$(BIN)/procmetrics report --store $(DEMO_STORE) --out $(DEMO_OUT) --overwrite \
		--policy-date "$$($(BIN)/python sample_repos/generate.py --print-change-date)" \
		--claims sample_repos/demo_claims.toml --scope-file sample_repos/demo_scopes.toml
	@echo "report written to $(DEMO_OUT)/report.html"

# Starts a throw-away PostgreSQL server (.ci/pg) for the `postgres` tests; stopped even on failure.
test: setup-test
	@pgdir=$$(mktemp -d) && trap 'sh .ci/pg stop "$$pgdir"' EXIT INT TERM && \
	PROCMETRICS_TEST_PG_URL=$$(sh .ci/pg start "$$pgdir") && export PROCMETRICS_TEST_PG_URL && \
	$(BIN)/python -m pytest -q -p no:cacheprovider -n 2 --dist loadfile --durations=15

$(VENV)/.installed-bench: $(VENV)/.installed-test
	$(BIN)/python -m pip install --quiet -e '.[test,bench]'
	touch $@

# Not part of `make test`. Sizes 100k, 300k and 1M commits by default (over an hour on 2 cores);
# fails (exit 1) when a figure regressed by more than 25% against bench/results/, e.g.
# make bench BENCH_ARGS="--sizes 20000,50000"   or   BENCH_ARGS=--no-gate
BENCH_ARGS ?=
bench: $(VENV)/.installed-bench
	$(BIN)/python bench/run.py $(BENCH_ARGS)

clean:
	rm -rf $(VENV) sample_repos/build reports/demo
