"""Running one report's writer in a forked child process while this process writes another.

Why: the JSON and the workbook of a large review each take seconds of pure Python and share
nothing but the review, which they only read. A forked child sees the review without it being
copied or pickled, so the two reports are built on two cores at once. Where there is no fork
(Windows), the writer runs here when the block ends, one report after the other as before.
"""

from __future__ import annotations

import os
import pickle
import signal
from contextlib import contextmanager
from typing import Callable


class Handoff:
    """What ``work()`` returned, once the ``with forked(...)`` block has ended (it must pickle)."""
    value = None


@contextmanager
def forked(work: Callable[[], object]):
    """Run ``work()`` in a forked child during the ``with`` block; the block gets a Handoff whose ``value`` is
    what ``work()`` returned, once the block has ended.

    Leaving the block waits for the child and raises here what ``work`` raised there (an InputError
    keeps its message; a child that died without a word raises ChildProcessError, an OSError).
    Leaving the block by an exception stops the child first.
    """
    handoff = Handoff()
    if not hasattr(os, "fork"):
        yield handoff
        handoff.value = work()
        return
    read_end, write_end = os.pipe()
    pid = os.fork()
    if pid == 0:                     # the child: never returns into the caller's code
        code = 0
        try:
            os.close(read_end)
            _send(write_end, True, work())
        except BaseException as e:   # noqa: BLE001 - everything goes back to the parent
            code = 1
            _send(write_end, False, e)
        finally:
            os._exit(code)           # no atexit handlers, no flushing of the parent's buffers
    os.close(write_end)
    reader = os.fdopen(read_end, "rb")
    try:
        yield handoff
        report = reader.read()       # the child's answer; complete when the child exits
    except BaseException:            # an error here, or Ctrl-C while waiting: the child's work is moot
        os.kill(pid, signal.SIGKILL)
        os.waitpid(pid, 0)
        raise
    finally:
        reader.close()
    _, status = os.waitpid(pid, 0)
    ok, payload = pickle.loads(report) if report else (False, None)
    if not ok and payload is not None:
        raise _received(payload)
    if status != 0 or not ok:
        why = (f"signal {os.WTERMSIG(status)}" if os.WIFSIGNALED(status) else f"exit code {os.WEXITSTATUS(status)}")
        raise ChildProcessError(f"the report writer process stopped ({why})")
    handoff.value = payload


def _send(fd: int, ok: bool, payload) -> None:
    """(True, the value) or (False, what describes the exception) down the pipe, as one pickle."""
    if ok:
        data = pickle.dumps((True, payload))
    else:
        try:
            exc = pickle.dumps(payload)
            pickle.loads(exc)        # some exception classes pickle but cannot be rebuilt
        except Exception:            # noqa: BLE001
            exc = None
        data = pickle.dumps((False, (exc, type(payload).__name__, str(payload))))
    with os.fdopen(fd, "wb") as f:
        f.write(data)


def _received(report: tuple) -> BaseException:
    exc, name, text = report
    if exc is not None:
        return pickle.loads(exc)
    return RuntimeError(f"{name}: {text}")
