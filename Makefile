# Two commands set everything up on a fresh Linux machine:
#   make demo   -- creates .venv, installs basinmark, opens it on the bundled sample set
#   make test   -- creates .venv, installs the test extras, runs the whole suite headless
PYTHON ?= python3
VENV   := .venv
PY     := $(VENV)/bin/python
DEMO_SET := sample_sets/ringfork

.PHONY: demo test bench screenshots clean-cache

$(VENV)/.installed: pyproject.toml
	test -x $(PY) || $(PYTHON) -m venv $(VENV)
	$(PY) -m pip install --quiet --upgrade pip
	$(PY) -m pip install --quiet -e .
	touch $@

$(VENV)/.installed-test: $(VENV)/.installed
	$(PY) -m pip install --quiet -e '.[test]'
	touch $@

# Qt's window platform (xcb) links system libraries a minimal Linux may lack: installed when run as root,
# otherwise the exact install command is printed and make stops before the window would fail to start
demo: $(VENV)/.installed
	scripts/qt-system-libs.sh $(PY) xcb
	$(PY) -m basinmark open $(DEMO_SET)

test: $(VENV)/.installed-test
	QT_QPA_PLATFORM=offscreen $(PY) -m pytest -n 2 -q

bench: $(VENV)/.installed-test
	$(PY) bench/run_all.py

screenshots: $(VENV)/.installed
	for script in scripts/screenshots*.py; do QT_QPA_PLATFORM=offscreen $(PY) $$script || exit 1; done

clean-cache:
	find sample_sets -name '.basinmark-cache' -type d -prune -exec rm -rf {} +
