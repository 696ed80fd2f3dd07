"""Sign-off across revisions: carry last review's decisions onto this one, and apply waivers.

Findings are matched by their stable key. A finding of this review is `new` (no finding with its key
last time), `changed` (its severity changed, or its value moved by more than `change_pct` % of the
larger of the two values) or `unchanged`; last time's findings with no match are `resolved`.
Disposition, Reviewer and Comment are copied onto the finding with the same key, whatever its status.

Reading a previous review: the JSON written by ``--json`` or a workbook written by ``--out`` (its
Findings sheet, columns found by their header). Cell contents are only ever taken as text or numbers.
"""

from __future__ import annotations

import datetime as dt
import json
import math
from dataclasses import dataclass, field
from pathlib import Path

from sicheck.errors import InputError
from sicheck.findings import SEVERITY_ORDER, Finding
from sicheck.waivers import Waiver, apply, finding_key

DISPOSITIONS = ("accept", "fix", "waive")
CHANGE_PCT = 1.0        # default: a value that moved by more than 1 % is "changed" (our choice, see README)
FINDINGS_SHEET = "Findings"
# workbook headers read back (the writer's names; a column may sit anywhere on the sheet)
H_KEY, H_DISP, H_REVIEWER, H_COMMENT = "Key", "Disposition", "Reviewer", "Comment"
H_SEVERITY, H_RULE, H_NET, H_LAYER, H_MESSAGE, H_VALUE, H_UNIT = (
    "Severity", "Rule", "Net", "Layer", "Finding", "Value", "Unit")


@dataclass(frozen=True)
class Prior:
    """A finding as an earlier review recorded it, with the decision typed beside it."""
    key: str
    severity: str = ""
    rule: str = ""
    net: str = ""
    layer: str = ""
    message: str = ""
    value: float | None = None
    unit: str = ""
    disposition: str = ""
    reviewer: str = ""
    comment: str = ""
    where: str = ""             # "row 7" / "findings[3]": for messages
    row: int | None = None      # its row on the workbook's Findings sheet


@dataclass(frozen=True)
class Mark:
    """What the sign-off adds to one finding of this review."""
    status: str = ""                    # new / changed / unchanged; "" without a previous review
    previous_value: float | None = None
    previous_severity: str = ""
    disposition: str = ""
    reviewer: str = ""
    comment: str = ""
    waiver: Waiver | None = None

    @property
    def waived(self) -> bool:
        return self.waiver is not None


NO_MARK = Mark()


@dataclass
class SignOff:
    previous: str | None = None
    waivers: str | None = None
    change_pct: float = CHANGE_PCT
    marks: dict[str, Mark] = field(default_factory=dict)
    resolved: list[Prior] = field(default_factory=list)

    def mark(self, f: Finding) -> Mark:
        return self.marks.get(finding_key(f), NO_MARK)

    @property
    def waived_keys(self) -> set[str]:
        return {k for k, m in self.marks.items() if m.waived}

    def counts(self) -> dict[str, int]:
        c = {"new": 0, "changed": 0, "unchanged": 0}
        for m in self.marks.values():
            if m.status:
                c[m.status] += 1
        c["resolved"] = len(self.resolved)
        c["carried"] = sum(1 for m in self.marks.values() if m.disposition or m.reviewer or m.comment)
        c["waived"] = len(self.waived_keys)
        return c


def moved_pct(old: float, new: float) -> float:
    """How far a value moved, in % of the larger magnitude (symmetric; 0 when equal)."""
    if old == new:
        return 0.0
    return abs(new - old) / max(abs(old), abs(new)) * 100.0


def status_of(prior: Prior, f: Finding, change_pct: float = CHANGE_PCT) -> str:
    if prior.severity and prior.severity != f.severity:
        return "changed"
    a = prior.value
    b = f.value if f.value is not None and math.isfinite(f.value) else None
    if a is None or b is None:
        return "unchanged" if a is None and b is None else "changed"
    return "changed" if moved_pct(a, b) > change_pct else "unchanged"


def sign_off(findings: list[Finding], prior: list[Prior] | None = None, previous: str | None = None,
             waivers: list[Waiver] | None = None, waivers_source: str | None = None,
             today: dt.date | None = None, change_pct: float = CHANGE_PCT) -> tuple[list[Finding], SignOff]:
    """This review's findings (plus those about waivers) and their sign-off marks."""
    out = list(findings)
    covered: dict[str, Waiver] = {}
    if waivers is not None:
        covered, notes = apply(out, waivers, today or dt.date.today(), waivers_source or "")
        out += notes
        out.sort(key=lambda f: (SEVERITY_ORDER[f.severity], f.rule, f.net, f.layer))
    old = {p.key: p for p in prior or ()}
    marks: dict[str, Mark] = {}
    for f in out:
        k = finding_key(f)
        p = old.get(k)
        status = "" if prior is None else ("new" if p is None else status_of(p, f, change_pct))
        if p is None and k not in covered and not status:
            continue
        marks[k] = Mark(status=status, previous_value=p.value if p else None,
                        previous_severity=p.severity if p else "",
                        disposition=p.disposition if p else "", reviewer=p.reviewer if p else "",
                        comment=p.comment if p else "", waiver=covered.get(k))
    now = {finding_key(f) for f in out}
    resolved = [p for p in prior or () if p.key not in now]
    return out, SignOff(previous=previous, waivers=waivers_source, change_pct=change_pct, marks=marks,
                        resolved=resolved)


# ---- reading an earlier review ------------------------------------------------------------------

def _text(v) -> str:
    """A cell or JSON value as plain text (numbers and dates as they read; None as empty)."""
    if v is None:
        return ""
    if isinstance(v, float) and v.is_integer():
        v = int(v)
    if isinstance(v, (dt.datetime, dt.date)):
        return v.isoformat()
    return str(v).strip()


def _number(v) -> float | None:
    if isinstance(v, bool) or v is None:
        return None
    if isinstance(v, (int, float)):
        return float(v) if math.isfinite(float(v)) else None
    try:
        x = float(str(v).strip())
    except ValueError:
        return None
    return x if math.isfinite(x) else None


def _disposition(v, file: str, **where) -> str:
    d = _text(v).lower()
    if d and d not in DISPOSITIONS:
        raise InputError(f"disposition '{_text(v)}' is not one of {', '.join(DISPOSITIONS)} (or empty)",
                         file=file, **where)
    return d


def read_previous(path: str | Path) -> list[Prior]:
    """The findings and decisions of an earlier review: its workbook (.xlsx) or its JSON."""
    p = Path(path)
    if not p.exists():
        raise InputError("previous review not found", file=str(p))
    if p.suffix.lower() == ".xlsx":
        return _read_workbook(p)
    if p.suffix.lower() == ".json":
        return _read_json(p)
    raise InputError("a previous review is a workbook (.xlsx) or JSON (.json) written by sicheck review",
                     file=str(p))


def _no_duplicates(priors: list[Prior], file: str) -> list[Prior]:
    seen: dict[str, Prior] = {}
    for p in priors:
        if p.key in seen:
            raise InputError(f"key '{p.key}' appears twice ({seen[p.key].where} and {p.where}); keep one",
                             file=file)
        seen[p.key] = p
    return priors


def _read_json(p: Path) -> list[Prior]:
    f = str(p)
    try:
        data = json.loads(p.read_text(encoding="utf-8-sig"))
    except (OSError, UnicodeDecodeError) as e:
        raise InputError(f"cannot read the previous review: {e}", file=f) from None
    except json.JSONDecodeError as e:
        raise InputError(f"not valid JSON: {e.msg}", file=f, line=e.lineno) from None
    items = data.get("findings") if isinstance(data, dict) else None
    if not isinstance(items, list):
        raise InputError("no 'findings' list: give the JSON written by sicheck review --json", file=f)
    out = []
    for i, d in enumerate(items):
        where = f"findings[{i}]"
        if not isinstance(d, dict):
            raise InputError("each finding must be an object", file=f, key=where)
        key = _text(d.get("key"))
        if not key:
            raise InputError("finding without a 'key'", file=f, key=f"{where}.key")
        out.append(Prior(key=key, severity=_text(d.get("severity")).lower(), rule=_text(d.get("rule")),
                         net=_text(d.get("net")), layer=_text(d.get("layer")), message=_text(d.get("message")),
                         value=_number(d.get("value")), unit=_text(d.get("unit")),
                         disposition=_disposition(d.get("disposition"), f, key=f"{where}.disposition"),
                         reviewer=_text(d.get("reviewer")), comment=_text(d.get("comment")), where=where))
    return _no_duplicates(out, f)


def _read_workbook(p: Path) -> list[Prior]:
    from openpyxl import load_workbook
    f = str(p)
    try:
        wb = load_workbook(p, read_only=True, data_only=False)
    except Exception as e:      # openpyxl raises many types for a file that is not a workbook
        raise InputError(f"cannot read the workbook: {type(e).__name__}: {e}", file=f) from None
    try:
        if FINDINGS_SHEET not in wb.sheetnames:
            raise InputError(f"no '{FINDINGS_SHEET}' sheet: give a workbook written by sicheck review --out",
                             file=f)
        rows = wb[FINDINGS_SHEET].iter_rows(values_only=True)
        header = [_text(h) for h in next(rows, ())]
        col = {h: j for j, h in reversed(list(enumerate(header))) if h}
        for need in (H_KEY, H_DISP, H_REVIEWER, H_COMMENT):
            if need not in col:
                raise InputError(f"the {FINDINGS_SHEET} sheet has no '{need}' column (a workbook from an older "
                                 "sicheck has no keys: sign off in a new review's workbook)", file=f,
                                 column=need)

        def get(r, h):
            j = col.get(h)
            return r[j] if j is not None and j < len(r) else None

        out = []
        for n, r in enumerate(rows, start=2):
            key = _text(get(r, H_KEY))
            if not key:
                if any(_text(get(r, h)) for h in (H_DISP, H_REVIEWER, H_COMMENT)):
                    raise InputError("a decision on a row without a key: it cannot be carried", file=f,
                                     row=n, column=H_KEY)
                continue
            out.append(Prior(key=key, severity=_text(get(r, H_SEVERITY)).lower(), rule=_text(get(r, H_RULE)),
                             net=_text(get(r, H_NET)), layer=_text(get(r, H_LAYER)),
                             message=_text(get(r, H_MESSAGE)), value=_number(get(r, H_VALUE)),
                             unit=_text(get(r, H_UNIT)),
                             disposition=_disposition(get(r, H_DISP), f, row=n, column=H_DISP),
                             reviewer=_text(get(r, H_REVIEWER)), comment=_text(get(r, H_COMMENT)),
                             where=f"row {n}", row=n))
    finally:
        wb.close()
    return _no_duplicates(out, f)


def decisions(priors: list[Prior], file: str) -> list[dict]:
    """The accepted and waived findings of a signed review, each with its reviewer (required)."""
    out = []
    for p in priors:
        if p.disposition not in ("accept", "waive") or p.key.startswith("waiver-"):
            continue            # findings about a waiver file are settled in that file, not by another waiver
        if not p.reviewer:
            raise InputError(f"'{p.disposition}' without a reviewer (finding '{p.key}'): a waiver says who decided; "
                             "fill in the reviewer", file=file, row=p.row, column=H_REVIEWER if p.row else None,
                             key=None if p.row else f"{p.where}.reviewer")
        out.append({"key": p.key, "disposition": p.disposition, "reviewer": p.reviewer, "comment": p.comment,
                    "severity": p.severity, "rule": p.rule, "net": p.net, "layer": p.layer})
    return out
