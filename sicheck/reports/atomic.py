"""Writing outputs atomically, and never over an input file."""

from __future__ import annotations

import os
import tempfile
from contextlib import contextmanager
from pathlib import Path

from sicheck.errors import InputError


def refuse_inputs(out: str | Path, inputs: list[str | Path], option: str) -> Path:
    """Raise InputError when ``out`` is one of the inputs (or a folder)."""
    p = Path(out)
    rp = p.resolve()
    for i in inputs:
        if i is not None and Path(i).exists() and Path(i).resolve() == rp:
            raise InputError(f"{option} would overwrite the input file; choose another name", file=str(p))
    if p.is_dir():
        raise InputError(f"{option} is a folder; give a file name", file=str(p))
    if not p.parent.exists():
        raise InputError(f"{option}: folder '{p.parent}' does not exist", file=str(p))
    return p


@contextmanager
def atomic_path(target: str | Path):
    """Yield a temporary path beside ``target``; on success rename it into place."""
    target = Path(target)
    fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".tmp", dir=target.parent)
    os.close(fd)
    umask = os.umask(0)
    os.umask(umask)
    os.chmod(tmp, 0o666 & ~umask)   # mkstemp makes 0600; outputs are ordinary files
    try:
        yield Path(tmp)
        os.replace(tmp, target)
    except BaseException:
        try:
            os.unlink(tmp)
        except FileNotFoundError:
            pass
        raise


def write_text_atomic(target: str | Path, text: str) -> None:
    with atomic_path(target) as tmp:
        tmp.write_text(text, encoding="utf-8")
