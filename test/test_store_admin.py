"""`helpaware store`: inspect, opt-out, forget, compact, export CSV (read back by the fit tool)."""
import csv
import os

import pytest

from helpaware_node.cli import main
from helpaware_node.core import Result
from helpaware_node.fit.data import read_outcome_csv
from helpaware_node.store import SqliteStore, StoredEvent
from helpaware_node.store.keys import load_site_key

COLUMNS = ["event_id", "person_key", "time_s", "busyness", "ask_load", "result", "request_kind"]


def seeded(tmp_path):
    path = tmp_path / "b.sqlite3"
    store = SqliteStore(path, "r1", load_site_key(tmp_path / "site_key"))
    for i in range(12):
        store.append(StoredEvent(store.next_event_id(), store.key_for(f"nurse-{i % 3}"),
                                 100.0 * i, list(Result)[i % 4], 0.25, 0.5, "door"))
    store.close()
    return str(path)


def test_export_has_exact_columns_no_raw_ids_and_fit_reads_it(tmp_path, capsys):
    path = seeded(tmp_path)
    out = tmp_path / "events.csv"
    assert main(["store", "--path", path, "export", "-o", str(out)]) == 0
    text = out.read_text()
    rows = list(csv.reader(text.splitlines()))
    assert rows[0] == COLUMNS and len(rows) == 13
    assert "nurse-" not in text
    assert float(rows[1][2]) == 0.0 and rows[1][5] == "helped" and rows[1][6] == "door"
    data = read_outcome_csv([str(out)])            # the fit tool's reader, unchanged
    assert len(data.person_keys) == 3


def test_inspect_opt_out_forget_compact(tmp_path, capsys):
    path = seeded(tmp_path)
    assert main(["store", "--path", path, "inspect"]) == 0
    out = capsys.readouterr().out
    assert "events" in out and " 12" in out
    assert main(["store", "--path", path, "inspect", "--person", "nurse-1"]) == 0
    out = capsys.readouterr().out
    assert "events stored" in out and "nurse-1" not in out
    assert main(["store", "--path", path, "opt-out", "--person", "nurse-2"]) == 0
    assert main(["store", "--path", path, "compact", "--older-than-days", "0",
                 "--now", "550"]) == 0
    assert "compacted 6" in capsys.readouterr().out
    assert main(["store", "--path", path, "forget", "--person", "nurse-0"]) == 0
    assert "4 event(s)" in capsys.readouterr().out
    store = SqliteStore(path, "r1", load_site_key(tmp_path / "site_key"))
    k0, k2 = store.key_for("nurse-0"), store.key_for("nurse-2")
    assert k0 not in store.keys() and store.is_opted_out(k2)
    assert store.counts()["events"] == 4     # 12 - 6 compacted - 2 of nurse-0
    store.close()


def test_clear_errors(tmp_path, capsys):
    with pytest.raises(SystemExit, match="does not exist"):
        main(["store", "--path", str(tmp_path / "none.sqlite3"), "inspect"])
    assert not (tmp_path / "none.sqlite3").exists()
    path = seeded(tmp_path)
    os.chmod(tmp_path / "site_key", 0o640)
    assert main(["store", "--path", path, "inspect"]) == 2
    assert "chmod 600" in capsys.readouterr().err
