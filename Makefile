# Developer shortcuts. `make check` is what to run before a commit.
PY ?= python

.PHONY: check lint test bench slow

check: lint test

lint:
	$(PY) -m ruff check tripcount tests bench

test:
	$(PY) -m pytest -q

slow:
	$(PY) -m pytest -q -m slow

bench:
	$(PY) bench/bench_engine.py
