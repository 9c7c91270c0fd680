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

"""`helpaware store`: inspect, opt-out, forget, compact, export CSV (read back by the fit tool)."""
import csv
import os

from helpaware_node.cli import main
from helpaware_node.core import Result
from helpaware_node.fit.data import read_outcome_csv
from helpaware_node.store import AskEvent, SqliteStore, StoredEvent
from helpaware_node.store.keys import load_site_key
import pytest

COLUMNS = ["event_id", "person_key", "time_s", "busyness", "ask_load", "result", "request_kind",
           "record", "request_id"]


def seeded(tmp_path):
    path = tmp_path / "b.sqlite3"
    store = SqliteStore(path, "r1", load_site_key(tmp_path / "site_key"))
    for i in range(12):
        key = store.key_for(f"nurse-{i % 3}")
        store.append_asks([AskEvent(store.next_event_id(), key, 100.0 * i, "door", f"n{i}")])
        store.append(StoredEvent(store.next_event_id(), key, 100.0 * i, list(Result)[i % 4],
                                 0.25, 0.5, "door"))
    store.close()
    return str(path)


def test_export_has_exact_columns_no_raw_ids_and_fit_reads_it(tmp_path, capsys):
    path = seeded(tmp_path)
    out = tmp_path / "events.csv"
    assert main(["store", "--path", path, "export", "-o", str(out)]) == 0
    text = out.read_text()
    rows = list(csv.reader(text.splitlines()))
    assert rows[0] == COLUMNS and len(rows) == 25          # 12 asks and 12 outcomes
    assert "nurse-" not in text
    # (time, event id) order: the ask r1/1 before its outcome r1/2 at the same time
    assert rows[1][7] == "ask" and rows[1][8] == "n0" and rows[1][3:6] == ["", "", ""]
    assert float(rows[2][2]) == 0.0 and rows[2][5] == "helped" and rows[2][6] == "door"
    assert rows[2][7] == "outcome"
    data = read_outcome_csv([str(out)])            # the fit tool reads it, asks skipped
    assert len(data.person_keys) == 3 and data.n_outcomes == 9   # could_not_ask skipped


def test_inspect_opt_out_forget_compact(tmp_path, capsys):
    path = seeded(tmp_path)
    assert main(["store", "--path", path, "inspect"]) == 0
    out = capsys.readouterr().out
    assert "events" in out and " 12" in out
    assert main(["store", "--path", path, "inspect", "--person", "nurse-1"]) == 0
    out = capsys.readouterr().out
    assert "events stored" in out and "nurse-1" not in out
    # nurse-1 was asked at 100, 400, 700 and 1000 s (i = 1, 4, 7, 10)
    assert "asks stored" in out and "1000.0" in out and "n10" in out and "n2 " not in out
    assert main(["store", "--path", path, "opt-out", "--person", "nurse-2"]) == 0
    assert main(["store", "--path", path, "compact", "--older-than-days", "0",
                 "--now", "550"]) == 0
    out = capsys.readouterr().out
    assert "compacted 6 event(s)" in out and "deleted 6 ask(s)" in out
    assert main(["store", "--path", path, "forget", "--person", "nurse-0"]) == 0
    assert "4 event(s)" in capsys.readouterr().out
    store = SqliteStore(path, "r1", load_site_key(tmp_path / "site_key"))
    k0, k2 = store.key_for("nurse-0"), store.key_for("nurse-2")
    assert k0 not in store.keys() and store.is_opted_out(k2)
    assert store.counts()["events"] == 4     # 12 - 6 compacted - 2 of nurse-0
    # asks: the 6 before 550 s compacted, then nurse-0's 2 later ones forgotten
    assert store.counts()["asks"] == 4 and store.asks(person_key=k0) == []
    store.close()


def test_clear_errors(tmp_path, capsys):
    with pytest.raises(SystemExit, match="does not exist"):
        main(["store", "--path", str(tmp_path / "none.sqlite3"), "inspect"])
    assert not (tmp_path / "none.sqlite3").exists()
    path = seeded(tmp_path)
    os.chmod(tmp_path / "site_key", 0o640)
    assert main(["store", "--path", path, "inspect"]) == 2
    assert "chmod 600" in capsys.readouterr().err
