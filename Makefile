# Two commands do everything on a fresh machine: `make demo` and `make test`.
# Both create or reuse .venv and install what requirements.txt lists.

VENV   := .venv
PY     := $(VENV)/bin/python
STAMP  := $(VENV)/.helpaware-installed

# DDS traffic stays on loopback, and each run gets its own domain so parallel runs do not
# hear each other. Set here on purpose: never inherited from the caller.
export ROS_AUTOMATIC_DISCOVERY_RANGE := LOCALHOST
export ROS_DOMAIN_ID := $(shell python3 -c "import random; print(random.randint(1, 100))")
unexport ROS_LOCALHOST_ONLY
export PYTHONDONTWRITEBYTECODE := 1

.PHONY: demo test bench soak venv clean

venv: $(STAMP)

$(STAMP): requirements.txt setup.py
	test -x $(PY) || python3 -m venv $(VENV)
	$(PY) -m pip install --quiet --disable-pip-version-check -r requirements.txt
	$(PY) -m pip install --quiet --disable-pip-version-check --no-deps --no-build-isolation -e .
	@# ament_python puts executables in lib/<package> (for ros2 run); link them onto the venv's PATH too
	for f in $(VENV)/lib/helpaware_node/*; do ln -sf ../lib/helpaware_node/$$(basename $$f) $(VENV)/bin/; done
	touch $(STAMP)

demo: $(STAMP)
	@echo "ROS_DOMAIN_ID=$(ROS_DOMAIN_ID) ROS_AUTOMATIC_DISCOVERY_RANGE=$(ROS_AUTOMATIC_DISCOVERY_RANGE)"
	$(PY) -m helpaware_node.cli demo

test: $(STAMP)
	$(PY) -m pytest

bench: $(STAMP)
	@# every bench/bench_*.py, each with a time limit; failures recorded in bench/RESULTS.md
	$(PY) bench/run_all.py

soak: $(STAMP)
	@# the reliability suite at soak length (100 000 decisions etc.); not part of make test
	HELPAWARE_SOAK=1 $(PY) -m pytest -q test/reliability

clean:
	rm -rf $(VENV) build *.egg-info .pytest_cache .hypothesis out
