# Two commands for a fresh clone: `make demo` and `make test`.
# Each creates .venv, installs the project and its dependencies, then runs.

PYTHON ?= $(shell command -v python3.11 || command -v python3)
VENV   := .venv
BIN    := $(VENV)/bin
STAMP  := $(VENV)/.installed
# Debian packages weasyprint needs (Pango and fonts) for the PDF report.
DEBIAN_PACKAGES := libpango-1.0-0 libpangoft2-1.0-0 libharfbuzz-subset0 fonts-dejavu-core

.PHONY: demo test bench system-deps clean

demo: $(STAMP)
	$(BIN)/egressmargin demo --out egressmargin-demo

test: $(STAMP)
	$(BIN)/python -m pytest -q tests src/egressmargin

bench: $(STAMP)
	$(BIN)/python bench/bench.py

system-deps:
	@if ldconfig -p 2>/dev/null | grep -q 'libpango-1.0.so' && ldconfig -p | grep -q 'libpangoft2-1.0.so' \
	    && { command -v fc-list >/dev/null && [ -n "$$(fc-list 2>/dev/null | head -n 1)" ]; }; then \
	  echo "system libraries for the PDF report: present"; \
	elif [ "$$(id -u)" = "0" ]; then \
	  echo "installing $(DEBIAN_PACKAGES) with apt-get"; \
	  apt-get update -q && DEBIAN_FRONTEND=noninteractive apt-get install -y -q $(DEBIAN_PACKAGES) fontconfig; \
	else \
	  echo "The PDF report needs Pango and a font. Run:"; \
	  echo "  sudo apt-get update && sudo apt-get install -y $(DEBIAN_PACKAGES) fontconfig"; \
	  exit 1; \
	fi

$(STAMP): pyproject.toml | system-deps
	@test -n "$(PYTHON)" || { echo "Python 3.11 or newer is needed (python3.11 or python3 on PATH)"; exit 1; }
	$(PYTHON) -c 'import sys; assert sys.version_info >= (3, 11), "Python >= 3.11 needed, found " + sys.version'
	$(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install -q --upgrade pip
	$(BIN)/python -m pip install -q -e '.[test]'
	touch $(STAMP)

clean:
	rm -rf $(VENV) egressmargin-demo build dist
