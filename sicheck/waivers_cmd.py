"""`sicheck waivers`: the accepted and waived findings of a signed review as a waiver file."""

from __future__ import annotations

import datetime as dt
import sys
from pathlib import Path

from sicheck.errors import InputError


def run_waivers(signed: Path, until: str | None, out: Path | None) -> int:
    from sicheck.reports.atomic import refuse_inputs, write_text_atomic
    from sicheck.signoff import decisions, read_previous
    from sicheck.waivers import waivers_toml

    end = None
    if until is not None:
        try:
            end = dt.date.fromisoformat(until.strip())
        except ValueError:
            raise InputError(f"--until must be a date such as 2027-06-30, not '{until}'") from None
    if out is not None:
        refuse_inputs(out, [signed], "--out", suffix=".toml")
    text = waivers_toml(decisions(read_previous(signed), str(signed)), end, source=Path(signed).name)
    if out is None:
        sys.stdout.write(text)
    else:
        write_text_atomic(out, text)
    return 0
