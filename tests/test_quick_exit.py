"""The program ends at once after `review` (sicheck/quick_exit.py) only when it is the program itself, and
only with every report written and every line of output out; a caller in its own process is untouched."""

import json
import subprocess
import sys
import weakref
from pathlib import Path

import pytest
from openpyxl import load_workbook

from sicheck import quick_exit

TRACES = """\
Net,Layer,Length [mm],Width [mm],Rise Time
CLK,L1,120,0.3,300ps
SLOW,L1,20,0.3,5ns
"""
RULES = """\
[[net_class]]
name = "CLK"
match = ["CLK"]
z0 = 20
"""
REPO = Path(__file__).resolve().parents[1]
# an atexit handler runs when the interpreter tears itself down, not when the process ends at once
PROGRAM = ("import atexit, sys; atexit.register(lambda: print('torn down', file=sys.stderr)); "
           "from sicheck.cli import main; sys.argv = ['sicheck'] + sys.argv[1:]; {call}")


def _review(tmp_path, board, call):
    tr, st, rl = board(TRACES, rules=RULES)
    out = [tmp_path / "r.xlsx", tmp_path / "r.json", tmp_path / "r.md"]
    args = [str(a) for a in (tr, "--stackup", st, "--rules", rl, "--out", out[0], "--json", out[1],
                             "--markdown", out[2])]
    p = subprocess.run([sys.executable, "-c", PROGRAM.format(call=call), "review", *args],
                       capture_output=True, text=True, cwd=REPO)
    return p, out


def test_program_ends_at_once_with_everything_written(tmp_path, board):
    p, (xlsx, js, md) = _review(tmp_path, board, "main()")
    assert "torn down" not in p.stderr                     # it did end at once
    assert p.returncode == 1, p.stderr                     # the review's exit code: an error finding (Z0 20 ohm)
    # the last lines printed are there (a pipe: block-buffered); the console wraps long paths, so without spaces
    assert "".join(p.stdout.split()).endswith(f"workbook:{xlsx}json:{js}markdown:{md}")
    data = json.loads(js.read_text())
    assert data["summary"]["findings"]["error"] >= 1
    assert "Findings" in load_workbook(xlsx, read_only=True).sheetnames
    assert md.read_text().strip()


def test_called_in_its_own_process_the_interpreter_ends_as_usual(tmp_path, board):
    p, (xlsx, js, _) = _review(tmp_path, board, "main(sys.argv[1:])")
    assert "torn down" in p.stderr and p.returncode == 1, p.stderr
    assert json.loads(js.read_text())["summary"]["findings"]["error"] >= 1


def test_errors_still_exit_2_with_their_message(tmp_path, board):
    tr, _ = board(TRACES)
    p = subprocess.run([sys.executable, "-c", PROGRAM.format(call="main()"), "review", str(tr), "--stackup",
                        str(tmp_path / "missing.toml")], capture_output=True, text=True, cwd=REPO)
    assert p.returncode == 2 and "missing.toml" in p.stderr and "Traceback" not in p.stderr


def test_in_process_review_is_freed(run, board, tmp_path, monkeypatch):
    import sicheck.review as review
    built = []
    real = review.build_review

    def build(*a, **k):
        rv = real(*a, **k)
        built.append(weakref.ref(rv))
        return rv

    monkeypatch.setattr(review, "build_review", build)
    tr, st, rl = board(TRACES, rules=RULES)
    code, out, err = run("review", tr, "--stackup", st, "--rules", rl, "--json", tmp_path / "r.json")
    assert code == 1, err
    assert quick_exit._kept is None                        # never allowed in a caller's process
    assert built and built[0]() is None                    # nothing kept it


def test_end_now_returns_unless_it_can_end_cleanly(monkeypatch):
    ended = []
    monkeypatch.setattr(quick_exit.os, "_exit", ended.append)
    monkeypatch.setattr(quick_exit, "_kept", None)
    quick_exit.keep("a review")
    assert quick_exit._kept is None                        # not allowed: nothing kept
    quick_exit.end_now(0)
    monkeypatch.setattr(quick_exit, "_kept", [])
    quick_exit.end_now(0)                                  # allowed but nothing kept: the usual ending
    quick_exit.keep("a review")
    quick_exit.end_now("a message for standard error")     # not a status: the interpreter prints and ends

    class Closed:
        def flush(self):
            raise OSError("closed pipe")

    with monkeypatch.context() as m:
        m.setattr(sys, "stdout", Closed())
        quick_exit.end_now(1)
    assert ended == []
    quick_exit.end_now(None)
    quick_exit.end_now(1)
    assert ended == [0, 1]


@pytest.fixture(autouse=True)
def _not_allowed_after(monkeypatch):
    monkeypatch.setattr(quick_exit, "_kept", quick_exit._kept)
