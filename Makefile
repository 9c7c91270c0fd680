# Two commands do everything on a fresh machine: `make demo` and `make test`.
# Both create or reuse .venv and install what requirements.txt lists.

VENV   := .venv
PY     := $(VENV)/bin/python
STAMP  := $(VENV)/.helpaware-installed

# ROS 2 launch, launch_ros and launch_testing sources, for machines without a ROS install (CI,
# developers with ../shared). Installed into the venv once; without the folder, the launch
# tests skip and say why.
ROS_LAUNCH_SRC   := ../shared/vendor/ros-launch
ROS_LAUNCH_STAMP := $(VENV)/.ros-launch-installed
ifneq ($(wildcard $(ROS_LAUNCH_SRC)/install.sh),)
TEST_SETUP := $(STAMP) $(ROS_LAUNCH_STAMP)
else
TEST_SETUP := $(STAMP)
endif

# DDS traffic stays on loopback, and each run gets its own domain so parallel runs do not
# hear each other. Set here on purpose: never inherited from the caller.
export ROS_AUTOMATIC_DISCOVERY_RANGE := LOCALHOST
export ROS_DOMAIN_ID := $(shell python3 -c "import random; print(random.randint(1, 100))")
unexport ROS_LOCALHOST_ONLY
export PYTHONDONTWRITEBYTECODE := 1

.PHONY: demo test check lint bench soak venv clean

# the pure core's tests (no rclpy, no processes): what `make check` runs after the linters
CORE_TESTS := test/test_belief.py test/test_baselines.py test/test_declined_numerics.py \
	test/test_lasting_cost.py test/test_limits_property.py test/test_policy.py \
	test/test_properties.py test/test_session.py test/test_session_bounds.py \
	test/test_session_properties.py test/test_wire.py test/test_json_nesting.py \
	test/test_error_messages.py test/test_event_ids.py test/test_store_memory.py
LINT_TESTS := test/test_flake8.py test/test_pep257.py test/test_copyright.py

venv: $(STAMP)

$(STAMP): requirements.txt setup.py
	test -x $(PY) || python3 -m venv $(VENV)
	$(PY) -m pip install --quiet --disable-pip-version-check -r requirements.txt
	$(PY) -m pip install --quiet --disable-pip-version-check --no-deps --no-build-isolation -e .
	@# ament_python puts executables in lib/<package> (for ros2 run); link them onto the venv's PATH too
	for f in $(VENV)/lib/helpaware_node/*; do ln -sf ../lib/helpaware_node/$$(basename $$f) $(VENV)/bin/; done
	touch $(STAMP)

# after the requirements (install.sh needs them); again whenever they or the sources change
$(ROS_LAUNCH_STAMP): $(STAMP) $(wildcard $(ROS_LAUNCH_SRC)/install.sh $(ROS_LAUNCH_SRC)/*/setup.py)
	$(ROS_LAUNCH_SRC)/install.sh $(PY)
	touch $(ROS_LAUNCH_STAMP)

demo: $(STAMP)
	@echo "ROS_DOMAIN_ID=$(ROS_DOMAIN_ID) ROS_AUTOMATIC_DISCOVERY_RANGE=$(ROS_AUTOMATIC_DISCOVERY_RANGE)"
	$(PY) -m helpaware_node.cli demo

# ruff (ruff.toml) and mypy (setup.cfg [mypy]): seconds, so first; the ament linters run
# inside pytest (test/test_flake8.py, test_pep257.py), as under `colcon test`
lint: $(STAMP)
	$(PY) -m ruff check .
	$(PY) -m mypy

# the quick checks for contributors: lint, types, the ament linters, the pure-core tests
check: lint
	HELPAWARE_HYPOTHESIS_PROFILE=quick $(PY) -m pytest -q $(LINT_TESTS) $(CORE_TESTS)

test: $(TEST_SETUP) lint
	$(PY) -m pytest

bench: $(STAMP)
	@# every bench/bench_*.py, each with a time limit; failures recorded in bench/RESULTS.md
	$(PY) bench/run_all.py

soak: $(STAMP)
	@# the reliability suite at soak length (100 000 decisions etc.); not part of make test
	HELPAWARE_SOAK=1 $(PY) -m pytest -q test/reliability

clean:
	rm -rf $(VENV) build *.egg-info .pytest_cache .hypothesis .mypy_cache .ruff_cache out
