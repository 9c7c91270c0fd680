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

"""`helpaware fit` reads every export `helpaware store export` writes (issue 14 item 5).

A peer's 1.2 MB request kind was stored (before kinds were bounded), and fit on the export
failed with `_csv.Error: field larger than field limit (131072)`. A store of that age is made
here with `bulk_load` (an import, which does not check), beside kinds that hold a comma, a
quote, line breaks and a line that starts with '#' (the fit reader skips comment lines, but
not inside a quoted field).

Outside sources: Python's csv module (with its field limit raised) reads the export back for
the expected rows; the answered asks are counted from the events written here.
"""
import csv
import sys

from helpaware_node.cli import main
from helpaware_node.core import Result
from helpaware_node.fit.data import read_outcome_csv
from helpaware_node.fit.simulate_outcomes import simulate
from helpaware_node.fit.site_likelihood import SiteParams
from helpaware_node.store import SqliteStore, StoredEvent
from helpaware_node.store.keys import load_site_key

LONG_KIND = "k" * 1_200_000
ODD_KINDS = ["door, west", 'say "hi"', "line\nbreak", "two\n\nblank lines", "x\n# not a comment",
             "\u540d\u524d", ""]
RESULTS = {0: Result.HELPED, 1: Result.DECLINED, 2: Result.NO_RESPONSE}


def old_store(tmp_path):
    path = tmp_path / "b.sqlite3"
    store = SqliteStore(path, "r1", load_site_key(tmp_path / "site_key"))
    data = simulate(SiteParams(2.0, 2.0, 2.0, 0.7, 0.8), n_people=30, asks_per_person=8, seed=3)
    events = []
    for i in range(data.n_outcomes):
        kind = LONG_KIND if i == 5 else ODD_KINDS[i % len(ODD_KINDS)]
        events.append(StoredEvent(f"r1/{i + 1}", store.key_for(f"p{data.person[i]}"),
                                  60.0 * i, RESULTS[int(data.result[i])],
                                  float(data.busyness[i]), float(data.load[i]), kind))
    events.append(StoredEvent("r2/1", store.key_for("p0"), 1.0, Result.COULD_NOT_ASK, 0.1, 0.0,
                              LONG_KIND))
    store.bulk_load(events)
    store.close()
    return str(path), events


def test_fit_reads_an_export_with_a_long_kind_and_odd_kinds(tmp_path, capsys):
    path, events = old_store(tmp_path)
    out = tmp_path / "export.csv"
    assert main(["store", "--path", path, "export", "-o", str(out)]) == 0
    before = csv.field_size_limit()
    csv.field_size_limit(sys.maxsize)
    try:
        with open(out, newline="", encoding="utf-8") as fh:
            rows = list(csv.DictReader(fh))
    finally:
        csv.field_size_limit(before)
    assert {r["request_kind"] for r in rows} == {e.request_kind for e in events}
    answered = [e for e in events if e.result is not Result.COULD_NOT_ASK]
    data = read_outcome_csv([str(out)])
    assert data.n_outcomes == len(answered) == len(rows) - 1
    assert csv.field_size_limit() == before        # raised for the read only
    code = main(["fit", str(out), "--out", str(tmp_path / "fitted.yaml"), "--folds", "0"])
    printed = capsys.readouterr().out
    assert code in (0, 3), printed                 # 3: fitted, but not converged
    assert f"{len(answered)} answered asks" in printed


def test_line_numbers_still_name_the_bad_line_after_a_multiline_field(tmp_path):
    p = tmp_path / "a.csv"
    p.write_text("# exported\nevent_id,person_key,time_s,busyness,ask_load,result,request_kind\n"
                 'e1,k1,10,0.2,0.0,helped,"line\n# inside\nbreak"\n'
                 "\n"
                 "e2,k1,20,1.7,0.0,helped,door\n", encoding="utf-8")
    from helpaware_node.fit.data import FitInputError
    import pytest
    with pytest.raises(FitInputError, match=r"a\.csv:7: busyness 1\.7"):
        read_outcome_csv([str(p)])


def test_a_file_that_is_not_utf8_is_named(tmp_path):
    from helpaware_node.fit.data import FitInputError
    import pytest
    p = tmp_path / "latin.csv"
    p.write_bytes(b"event_id,person_key,time_s,busyness,result\ne1,k\xe9,1,0.1,helped\n")
    with pytest.raises(FitInputError, match=r"latin\.csv: not UTF-8"):
        read_outcome_csv([str(p)])
