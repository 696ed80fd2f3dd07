"""Writing outputs atomically, and never over an input file."""

from __future__ import annotations

import os
import tempfile
from contextlib import contextmanager
from pathlib import Path

from sicheck.errors import InputError


def refuse_inputs(out: str | Path, inputs: list[str | Path], option: str, suffix: str | None = None) -> Path:
    """Check an output path before any long work: raise InputError when ``out`` is one of the inputs,
    a folder, has the wrong suffix, or lies in a folder that is missing or cannot be written."""
    p = Path(out)
    if suffix is not None and p.suffix.lower() != suffix:
        raise InputError(f"{option} writes a {suffix} file: give a name ending in {suffix}", file=str(p))
    rp = p.resolve()
    for i in inputs:
        if i is not None and Path(i).exists() and Path(i).resolve() == rp:
            raise InputError(f"{option} would overwrite the input file; choose another name", file=str(p))
    if p.is_dir():
        raise InputError(f"{option} is a folder; give a file name", file=str(p))
    parent = p.parent
    if not parent.exists():
        raise InputError(f"{option}: folder '{parent}' does not exist", file=str(p))
    if not parent.is_dir():
        raise InputError(f"{option}: '{parent}' is a file, not a folder", file=str(p))
    # the only reliable test of "can I write here" (permissions, read-only mounts, ACLs) is to try
    try:
        fd, probe = tempfile.mkstemp(prefix=f".{p.name}.", suffix=".probe", dir=parent)
        os.close(fd)
        os.unlink(probe)
    except OSError as e:
        raise InputError(f"{option}: cannot write into folder '{parent}' ({e.strerror or e})", file=str(p)) from None
    return p


@contextmanager
def atomic_path(target: str | Path):
    """Yield a temporary path beside ``target``; on success rename it into place."""
    target = Path(target)
    try:
        fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".tmp", dir=target.parent)
    except OSError as e:
        raise InputError(f"cannot write here ({e.strerror or e})", file=str(target)) from None
    os.close(fd)
    umask = os.umask(0)
    os.umask(umask)
    os.chmod(tmp, 0o666 & ~umask)   # mkstemp makes 0600; outputs are ordinary files
    try:
        yield Path(tmp)
        os.replace(tmp, target)
    except BaseException as e:
        try:
            os.unlink(tmp)
        except FileNotFoundError:
            pass
        if isinstance(e, OSError):       # disk full, folder made read-only meanwhile: a message, not a traceback
            raise InputError(f"could not write the file ({e.strerror or e})", file=str(target)) from None
        raise


def write_text_atomic(target: str | Path, text: str) -> None:
    with atomic_path(target) as tmp:
        tmp.write_text(text, encoding="utf-8")
