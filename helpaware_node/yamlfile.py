"""Reading a YAML file given by the user, with one clear message for each way it can fail."""
from __future__ import annotations

from typing import Any

import yaml


def load_yaml_file(path: str, error: type[Exception], what: str) -> Any:
    """Return the parsed document; `error(message)` names `what`, the file and the reason."""
    try:
        with open(path, encoding="utf-8") as fh:
            return yaml.safe_load(fh)
    except OSError as exc:
        raise error(f"{what} {path}: cannot read ({exc.strerror or exc})") from None
    except UnicodeDecodeError as exc:
        raise error(f"{what} {path}: not UTF-8 text (byte {exc.start})") from None
    except yaml.YAMLError as exc:
        raise error(f"{what} {path}: not valid YAML ({exc})") from None
