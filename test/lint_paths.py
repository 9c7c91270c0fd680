"""What the linter tests check: every Python source of the repository, and the settings file.

The paths are absolute, so the tests give one answer whether pytest runs from the repository
(`make test`) or from a copy of the source (`colcon test`).
"""
import os

ROOT = os.path.abspath(os.path.join(os.path.dirname(__file__), ".."))
SETUP_CFG = os.path.join(ROOT, "setup.cfg")
SOURCE_PATHS = [p for p in (os.path.join(ROOT, name) for name in (
    "helpaware_node", "test", "bench", "launch", "tools", "setup.py")) if os.path.exists(p)]
