# ventsup developer and CI entry points (GNU make).
#
#   make test    lint, then pytest; what CI runs (through .ci/run)
#   make lint    ruff check + ruff format --check + mypy (strict on the core and config)
#   make venv    .venv with the project installed editable, extras [test]
#   make broker  Debian's mosquitto and mosquitto-clients, for the broker tests
#   make demo    run `ventsup demo`
#   make clean   remove caches and build artefacts (keeps .venv; `make distclean` removes it)

SHELL := /bin/bash
.SHELLFLAGS := -eu -o pipefail -c
.DEFAULT_GOAL := test
MAKEFLAGS += --no-builtin-rules

VENV := .venv
PY := $(VENV)/bin/python
STAMP := $(VENV)/.installed
LINT_PATHS := ventsup simulator tests benchmarks

.PHONY: venv broker browser test lint demo clean distclean

venv: $(STAMP)

# The stamp lives inside .venv so that deleting .venv also forces a reinstall.
# Reinstall only when pyproject.toml is newer than the last install.
$(STAMP): pyproject.toml
	@if [ -x "$(PY)" ] && ! "$(PY)" -c 'import sys; sys.exit(sys.version_info < (3, 11))' 2>/dev/null; then \
		echo "error: $(VENV) uses Python $$("$(PY)" -c 'import platform; print(platform.python_version())' 2>/dev/null || echo '?'); ventsup needs 3.11+. Run 'make distclean' and retry." >&2; \
		exit 1; \
	fi
	@if [ ! -x "$(PY)" ]; then \
		py=""; \
		for candidate in python3.11 python3; do \
			if "$$candidate" -c 'import sys; sys.exit(sys.version_info < (3, 11))' >/dev/null 2>&1; then \
				py="$$candidate"; break; \
			fi; \
		done; \
		if [ -z "$$py" ]; then \
			echo "error: no Python 3.11+ found (tried python3.11, python3)." >&2; \
			echo "       Install one, e.g. 'sudo apt-get install python3.11 python3.11-venv', then run 'make venv'." >&2; \
			exit 1; \
		fi; \
		echo "creating $(VENV) with $$py ($$("$$py" -c 'import platform; print(platform.python_version())'))"; \
		"$$py" -m venv "$(VENV)"; \
	fi
	"$(PY)" -m pip install --disable-pip-version-check --no-input -e '.[test]'
	@touch "$(STAMP)"

# Debian installs the broker in /usr/sbin, which a non-root PATH may lack.
broker:
	@if { command -v mosquitto >/dev/null 2>&1 || [ -x /usr/sbin/mosquitto ]; } \
		&& command -v mosquitto_pub >/dev/null 2>&1 \
		&& command -v mosquitto_sub >/dev/null 2>&1; then \
		exit 0; \
	fi; \
	if [ "$$(id -u)" -eq 0 ]; then \
		if ! command -v apt-get >/dev/null 2>&1; then \
			echo "error: mosquitto is missing and apt-get is not available; install mosquitto and mosquitto-clients (mosquitto 2.0) with this system's package manager." >&2; \
			exit 1; \
		fi; \
		echo "installing mosquitto and mosquitto-clients with apt-get"; \
		apt-get update; \
		DEBIAN_FRONTEND=noninteractive apt-get install -y mosquitto mosquitto-clients </dev/null; \
	else \
		echo "error: the broker tests need Debian's mosquitto and its command-line clients:" >&2; \
		echo "       sudo apt-get install mosquitto mosquitto-clients" >&2; \
		exit 1; \
	fi

# The report tests open the HTML page in Debian's headless Chromium.
browser:
	@if command -v chromium >/dev/null 2>&1; then exit 0; fi; \
	if [ "$$(id -u)" -eq 0 ] && command -v apt-get >/dev/null 2>&1; then \
		echo "installing chromium with apt-get"; \
		apt-get update; \
		DEBIAN_FRONTEND=noninteractive apt-get install -y chromium </dev/null; \
	else \
		echo "error: the report tests need Debian's chromium (run headless):" >&2; \
		echo "       sudo apt-get install chromium" >&2; \
		exit 1; \
	fi

# pytest exits with 5 when it collected no tests: say so, then fail.
test: lint broker browser
	@echo '$(PY) -m pytest'; \
	rc=0; "$(PY)" -m pytest || rc=$$?; \
	if [ "$$rc" -eq 5 ]; then \
		echo "error: pytest collected no tests (exit code 5); a test run that checks nothing is a failure." >&2; \
	fi; \
	exit "$$rc"

lint: venv
	$(VENV)/bin/ruff check $(LINT_PATHS)
	$(VENV)/bin/ruff format --check $(LINT_PATHS)
	$(VENV)/bin/mypy

demo: venv
	$(VENV)/bin/ventsup demo

clean:
	rm -rf build dist *.egg-info out .pytest_cache .mypy_cache .ruff_cache .hypothesis
	find . -path ./$(VENV) -prune -o -type d -name __pycache__ -exec rm -rf {} +

distclean: clean
	rm -rf $(VENV)
