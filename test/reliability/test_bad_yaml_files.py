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

"""Corrupt YAML given to the offline tools.

Scenario files (`helpaware simulate`), parameter files (`helpaware review --params`, the files
`helpaware fit` writes). Each gives its own error naming the file and the reason; none escapes as a
raw yaml, OS or decode error.
"""
from helpaware_node.fit.paramfile import read_param_file
from helpaware_node.node_param_file import parameters_from_yaml, ParamFileError
from helpaware_node.sim.scenario import load as load_scenario, ScenarioError
import pytest

BAD = {
    "unclosed_bracket": (b"a: [1, 2\n", "not valid YAML"),
    "tab_indent": (b"a:\n\t- 1\n", "not valid YAML"),
    "latin1_bytes": (b"name: caf\xe9\n", "not UTF-8"),
    "directory": (None, "cannot read"),
    "missing": ("absent", "cannot read"),
}
LOADERS = [(load_scenario, ScenarioError), (parameters_from_yaml, ParamFileError),
           (read_param_file, ValueError)]


@pytest.mark.parametrize("case", sorted(BAD))
@pytest.mark.parametrize("loader,error", LOADERS, ids=["scenario", "review_params", "fit_file"])
def test_corrupt_yaml_names_the_file_and_the_reason(tmp_path, case, loader, error):
    content, reason = BAD[case]
    path = tmp_path / "site.yaml"
    if content is None:
        path.mkdir()
    elif content != "absent":
        path.write_bytes(content)
    with pytest.raises(error) as info:
        loader(str(path))
    assert str(path) in str(info.value) and reason in str(info.value)
