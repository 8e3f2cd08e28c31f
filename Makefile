# Curvewise developer entry points. Every target creates .venv on first use.
PYTHON ?= python3
VENV   := .venv
BIN    := $(VENV)/bin
PORT   ?= 8000
STAMP  := $(VENV)/.installed-$(shell cat pyproject.toml client/pyproject.toml 2>/dev/null | cksum | cut -d' ' -f1)

.PHONY: run test bench lint clean install

$(STAMP): pyproject.toml
	@echo "curvewise: installing into $(VENV) (first run, or after a dependency change)"
	test -x $(BIN)/python || $(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip
	$(BIN)/python -m pip install --quiet -e ./client -e '.[test]'
	rm -f $(VENV)/.installed-*
	touch $(STAMP)

install: $(STAMP)

run: $(STAMP)  ## serve on 127.0.0.1:$(PORT) (default 8000; make run PORT=8080)
	$(BIN)/curvewise serve --host 127.0.0.1 --port $(PORT)

test: $(STAMP)  ## lint, then the whole suite
	$(BIN)/ruff check service schemas client tests benchmarks
	$(BIN)/python -m pytest

bench: $(STAMP)  ## ratio benchmarks, printed side by side
	for f in benchmarks/bench_*.py; do echo "== $$f"; $(BIN)/python $$f || exit 1; done

lint: $(STAMP)
	$(BIN)/ruff check service schemas client tests benchmarks

clean:
	rm -rf $(VENV) .pytest_cache .hypothesis
