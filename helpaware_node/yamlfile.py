# Copyright 2026 The helpaware_node authors
#
# Licensed under the Apache License, Version 2.0 (the "License");
# you may not use this file except in compliance with the License.
# You may obtain a copy of the License at
#
#     http://www.apache.org/licenses/LICENSE-2.0
#
# Unless required by applicable law or agreed to in writing, software
# distributed under the License is distributed on an "AS IS" BASIS,
# WITHOUT WARRANTIES OR CONDITIONS OF ANY KIND, either express or implied.
# See the License for the specific language governing permissions and
# limitations under the License.

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
