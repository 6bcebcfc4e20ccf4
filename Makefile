# Set-up and everyday commands. `make demo` and `make test` are all a new machine needs.
PYTHON ?= python3
VENV := .venv
BIN := $(VENV)/bin

.PHONY: demo test install install-test browser bench demo-data clean

$(BIN)/python:
	$(PYTHON) -m venv $(VENV)
	$(BIN)/pip install --quiet --upgrade pip

install: $(BIN)/python
	$(BIN)/pip install --quiet -e .

install-test: $(BIN)/python
	$(BIN)/pip install --quiet -e ".[test]"

# Debian's Chromium for the report's browser test (skipped when it cannot be installed).
browser:
	@command -v chromium >/dev/null 2>&1 || { \
	  (apt-get update -qq && DEBIAN_FRONTEND=noninteractive apt-get install -y -qq chromium >/dev/null) \
	  || echo "note: chromium not installed; browser tests will be skipped"; }

demo: install
	$(BIN)/cosmogrow demo --out demo_results

test: install-test browser
	$(BIN)/python -m pytest -q -ra

# Each benchmark prints its own rows; the last line prints them all as one table (the README's).
bench: install
	@rm -f .bench_rows.jsonl
	BENCH_ROWS=.bench_rows.jsonl $(BIN)/python analysis/bench_command.py
	BENCH_ROWS=.bench_rows.jsonl $(BIN)/python analysis/bench_fit.py --max-n 100000
	BENCH_ROWS=.bench_rows.jsonl MALLOC_MMAP_THRESHOLD_=33554432 MALLOC_TRIM_THRESHOLD_=1073741824 \
		$(BIN)/python analysis/bench_selection.py
	BENCH_ROWS=.bench_rows.jsonl $(BIN)/python analysis/bench_campaign.py
	BENCH_ROWS=.bench_rows.jsonl $(BIN)/python analysis/bench_fast_fit.py
	BENCH_ROWS=.bench_rows.jsonl $(BIN)/python analysis/calib_hardcut.py --realisations 300 --mode fast
	BENCH_ROWS=.bench_rows.jsonl $(BIN)/python analysis/calib_hardcut.py --realisations 300 --mode importance
	$(BIN)/python analysis/bench_verdicts.py
	@echo; $(BIN)/python analysis/bench_table.py .bench_rows.jsonl; rm -f .bench_rows.jsonl

demo-data: install
	$(BIN)/python analysis/make_demo_data.py

clean:
	rm -rf $(VENV) demo_results .pytest_cache
