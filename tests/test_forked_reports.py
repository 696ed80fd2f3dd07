"""The JSON written in a forked child while the workbook is written here (reports/forked.py): the same files
as one after the other, and an error in the child reaches the user as a message with the usual exit code."""

from __future__ import annotations

import errno
import gc
import os
import signal

import pytest
from openpyxl import load_workbook

from sicheck.errors import InputError
from sicheck.reports import json_report
from sicheck.reports.forked import forked

TRACES = """\
Net,Layer,Length [mm],Width [mm],Rise Time,Pair,Gap [mm]
CLK,L1,120,0.3,300ps,,
=SUM(A1),L3,5,0.15,1ns,,
SLOW,L1,20,0.3,5ns,,
RX_P,L3,150,0.1,200ps,RX_N,0.2
RX_N,L3,151,0.1,200ps,RX_P,0.2
"""


def _cells(path):
    """Every sheet's cells: value and number format, row by row."""
    wb = load_workbook(path)
    return {ws.title: [[(c.value, c.number_format) for c in row] for row in ws.iter_rows()] for ws in wb}


def _review(run, board, tmp_path, tag):
    tr, st = board(TRACES)
    xlsx, js = tmp_path / f"{tag}.xlsx", tmp_path / f"{tag}.json"
    code, out, err = run("review", tr, "-s", st, "-o", xlsx, "--json", js)
    return code, err, xlsx, js


def test_forked_and_sequential_write_the_same_files(run, board, tmp_path, monkeypatch):
    pids = []
    real = json_report.write_review_json

    def recording(path, rv):
        pids.append(os.getpid())
        (tmp_path / "json-writer-pid").write_text(str(os.getpid()))     # a forked child's list is its own
        real(path, rv)

    monkeypatch.setattr(json_report, "write_review_json", recording)
    code_f, err_f, xlsx_f, js_f = _review(run, board, tmp_path, "forked")
    assert code_f in (0, 1), err_f
    assert pids == [] and int((tmp_path / "json-writer-pid").read_text()) != os.getpid()   # ran in a child
    monkeypatch.delattr(os, "fork")          # as on a system without fork: one report after the other
    code_s, err_s, xlsx_s, js_s = _review(run, board, tmp_path, "sequential")
    assert pids == [os.getpid()]
    assert code_s == code_f
    assert js_f.read_bytes() == js_s.read_bytes()
    assert _cells(xlsx_f) == _cells(xlsx_s)
    assert not [p for p in tmp_path.iterdir() if p.name.startswith(".")]      # no temporary files left
    assert gc.isenabled()                     # paused while the reports are written, and only then


def test_json_only_writes_in_this_process(run, board, tmp_path, monkeypatch):
    tr, st = board(TRACES)
    pids = []
    real = json_report.write_review_json
    monkeypatch.setattr(json_report, "write_review_json", lambda p, rv: (pids.append(os.getpid()), real(p, rv)))
    code, _, err = run("review", tr, "-s", st, "--json", tmp_path / "only.json")
    assert code in (0, 1), err
    assert pids == [os.getpid()] and (tmp_path / "only.json").stat().st_size > 0


def test_a_write_error_in_the_child_is_a_message_and_exit_2(run, board, tmp_path, monkeypatch):
    def disk_full(path, rv):
        with open(path, "w") as f:
            f.write("{")
        raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))

    monkeypatch.setattr(json_report, "write_review_json", disk_full)
    code, err, xlsx, js = _review(run, board, tmp_path, "full")
    assert code == 2
    assert "Traceback" not in err
    assert str(js) in err and "could not write the file" in err and os.strerror(errno.ENOSPC) in err
    assert not js.exists()                                  # the target is never left half-written
    assert not [p for p in tmp_path.iterdir() if p.name.startswith(".")]


def test_a_bug_in_the_child_is_an_internal_error_as_before(run, board, tmp_path, monkeypatch):
    def broken(path, rv):
        raise KeyError("nets")

    monkeypatch.setattr(json_report, "write_review_json", broken)
    code, err, _, js = _review(run, board, tmp_path, "bug")
    assert code == 3
    assert "internal error: KeyError" in err and "Traceback" not in err
    assert not js.exists()


def test_child_errors_come_back_with_their_type_and_message():
    with pytest.raises(InputError, match="x.csv, row 3: bad"):
        with forked(lambda: (_ for _ in ()).throw(InputError("bad", file="x.csv", row=3))):
            pass

    class Odd(Exception):                     # pickles, but cannot be rebuilt from its args
        def __init__(self, a, b):
            super().__init__(f"{a}{b}")

    def odd():
        raise Odd("half", "way")

    with pytest.raises(RuntimeError, match="Odd: halfway"):
        with forked(odd):
            pass


def test_a_child_that_dies_is_an_os_error():
    with pytest.raises(ChildProcessError, match="signal 9"):
        with forked(lambda: os.kill(os.getpid(), signal.SIGKILL)):
            pass


def test_an_error_here_stops_the_child(tmp_path):
    mark = tmp_path / "done"

    def slow():
        import time
        time.sleep(30)
        mark.write_text("finished")

    with pytest.raises(ValueError):
        with forked(slow):
            raise ValueError("workbook failed")
    assert not mark.exists()


def test_json_pieces_join_to_the_one_piece_text(monkeypatch):
    import json

    import orjson

    monkeypatch.setattr(json_report, "PIECE_ITEMS", 3)
    doc = {"summary": {"a": 1.5, "ü": None}, "empty": [], "short": [1, 2, 3], "long": [{"x": i / 7} for i in range(10)],
           "text": ["→", "a\"b", "\n"] * 3, "last": "end"}
    want = orjson.dumps(doc)
    pieces = list(json_report.json_pieces(doc))
    assert b"".join(pieces) == want
    assert json.loads(want) == doc
    assert max(map(len, pieces)) < len(want) / 3            # no piece holds the whole document


def test_the_childs_return_value_comes_back():
    with forked(lambda: {"crc": 7, "name": "sheet1.xml"}) as handoff:
        pass
    assert handoff.value == {"crc": 7, "name": "sheet1.xml"}


def test_a_write_error_in_the_sheet_bodies_process_is_a_message_and_exit_2(run, board, tmp_path, monkeypatch):
    from sicheck.reports import sheet_rows
    parent, real = os.getpid(), sheet_rows.deflate

    def full_there(chunks, level, out=None):         # the disk fills up while the forked process writes
        if os.getpid() != parent:
            raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))
        return real(chunks, level, out)

    monkeypatch.setattr(sheet_rows, "FORK_MIN_CELLS", 0)      # a small workbook's largest body goes there too
    monkeypatch.setattr(sheet_rows, "deflate", full_there)
    code, err, xlsx, js = _review(run, board, tmp_path, "bodies")
    assert code == 2
    assert "Traceback" not in err
    assert str(xlsx) in err and os.strerror(errno.ENOSPC) in err
    assert not xlsx.exists()
    assert not [p for p in tmp_path.iterdir() if p.name.startswith(".")]      # no part files left behind
