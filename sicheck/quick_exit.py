"""Ending the command-line process as soon as its command is done, without freeing its heap first.

Why: a large review is millions of Python objects. Freeing them one by one when `review` returns, and
then the interpreter's own teardown, cost about half a second on a 100 000-segment board, spent on a
process that is about to end anyway. Only the program itself asks for this (cli.main called with no
arguments: the console script and `python -m sicheck`), never a test or a library caller, which call
the commands in their own process. By the time the command has returned, every file it wrote is closed
(written atomically; the forked JSON writer waited for); standard output and error are flushed here,
and a flush that fails leaves the ending to the interpreter, as before.
"""

from __future__ import annotations

import os
import sys

_kept: list | None = None     # a list once the process may end at once: what is not freed before it ends


def allow() -> None:
    """This process is the program: it may end at once when its command is done."""
    global _kept
    _kept = []


def keep(*objects) -> None:
    """Leave ``objects`` to the end of the process when it may end at once; else nothing (freed as usual)."""
    if _kept is not None:
        _kept.extend(objects)


def end_now(code) -> None:
    """End the process with exit status ``code``, buffers flushed, what was kept not freed. Returns (the
    caller then exits as usual) when nothing was kept, the status is not a number or a flush fails."""
    if not _kept or not (code is None or isinstance(code, int)):
        return
    try:
        sys.stdout.flush()
        sys.stderr.flush()
    except (OSError, ValueError):       # a closed pipe or stream: the interpreter reports it as it always did
        return
    os._exit(int(code or 0))
