"""Waivers: a TOML file of sign-off decisions that CI applies to a review.

A ``[[waiver]]`` names the findings it covers either by ``key`` (a finding's stable key, exact) or by
``rule`` plus a ``net`` glob and an optional ``layer``; it says ``reason`` and ``by`` and may end on
``until`` (a date). Matching is pure: `apply` takes the findings and today's date and returns which
findings each waiver covers, plus the findings about the waivers themselves (expired: error; unused: info).
"""

from __future__ import annotations

import datetime as dt
import re
from dataclasses import dataclass, replace
from functools import lru_cache
from pathlib import Path

from sicheck.checks.engine import PAIR_SEP
from sicheck.errors import InputError
from sicheck.findings import Finding
from sicheck.tomlsrc import TomlSource

EXPIRED_RULE = "waiver-expired"
UNUSED_RULE = "waiver-unused"
FIELDS = ("key", "rule", "net", "layer", "reason", "by", "until")
DEFAULT_REASON = {"accept": "accepted at sign-off (no comment given)", "waive": "waived at sign-off (no comment given)"}


@dataclass(frozen=True)
class Waiver:
    index: int                  # 1-based position in the file
    line: int | None            # line of its [[waiver]] header, for messages
    reason: str
    by: str
    key: str | None = None
    rule: str | None = None
    net: str | None = None      # glob: * any run of characters, ? one character, nothing else special
    layer: str | None = None
    until: dt.date | None = None

    @property
    def target(self) -> str:
        """What it waives, in one short string (also the key of the findings about the waiver)."""
        if self.key is not None:
            return self.key
        return "|".join(p for p in (self.rule, self.net, self.layer) if p)

    def matches(self, f: Finding) -> bool:
        if self.key is not None:
            return finding_key(f) == self.key
        if f.rule != self.rule or not any(glob_match(self.net or "*", n) for n in _names(f.net)):
            return False
        if self.layer is None:
            return True
        # a finding about several layers ("L1 > L3") is covered when the waiver names one of them
        return self.layer.casefold() in {p.strip().casefold() for p in f.layer.split(">")}

    def expired(self, today: dt.date) -> bool:
        return self.until is not None and self.until < today

    def describe(self) -> str:
        until = f", until {self.until.isoformat()}" if self.until else ""
        return f"{self.by}: {self.reason}{until}"


def _names(net: str) -> tuple[str, ...]:
    """A finding's net as shown, and a pair ("A & B") also the other way round ("B & A")."""
    if PAIR_SEP not in net:
        return (net,)
    a, b = net.split(PAIR_SEP, 1)
    return (net, f"{b}{PAIR_SEP}{a}")


def finding_key(f: Finding) -> str:
    """The key a finding is known by (the JSON's fallback for a finding built without one)."""
    return f.key or f"{f.rule}|{f.net}"


@lru_cache(maxsize=4096)
def _glob_rx(pattern: str) -> re.Pattern:
    return re.compile("".join(".*" if c == "*" else "." if c == "?" else re.escape(c) for c in pattern),
                      re.IGNORECASE | re.DOTALL)


def glob_match(pattern: str, name: str) -> bool:
    """Case-insensitive glob with * and ? only: net names such as DATA[0] or +5V stay literal."""
    return _glob_rx(pattern).fullmatch(name) is not None


def _known_rules() -> set[str]:
    from sicheck.checks import CHECKS
    return {c.id for c in CHECKS}


def _rule_problem(rule: str, known: set[str]) -> str | None:
    if rule in (EXPIRED_RULE, UNUSED_RULE):
        return f"'{rule}' findings are about the waiver file itself and cannot be waived: renew or remove that waiver"
    if rule not in known:
        return f"'{rule}' is not a check of sicheck (see `sicheck rules`)"
    return None


def _date(v, src: TomlSource, i: int) -> dt.date:
    if isinstance(v, dt.datetime):
        return v.date()
    if isinstance(v, dt.date):
        return v
    if isinstance(v, str):
        try:
            return dt.date.fromisoformat(v.strip())
        except ValueError:
            pass
    raise src.error(f"'until' must be a date such as 2027-06-30, not {v!r}", key="until", header="waiver", index=i)


def load_waivers(path: str | Path) -> list[Waiver]:
    """Read and validate a waiver file; every problem names the file, the line and the key."""
    src = TomlSource(path, "waiver")
    data = src.data
    extra = [k for k in data if k != "waiver"]
    if extra:
        k = extra[0]
        heads = [n + 1 for n, l in enumerate(src.lines) if re.match(rf"^\s*\[\[?\s*{re.escape(k)}\s*\]", l)]
        raise InputError(f"unknown table or key '{k}': a waiver file holds only [[waiver]] entries",
                         file=src.path, line=src.line_of(k) or (heads[0] if heads else None), key=k)
    entries = data.get("waiver", [])
    if not isinstance(entries, list) or not all(isinstance(e, dict) for e in entries):
        raise src.error("'waiver' must be an array of tables: write each entry as [[waiver]]", key="waiver")
    known = _known_rules()
    out = []
    for i, e in enumerate(entries):
        def err(msg, key=None):
            return src.error(f"waiver {i + 1}: {msg}", key=key, header="waiver", index=i)

        for k in e:
            if k not in FIELDS:
                raise err(f"unknown key '{k}' (a waiver has {', '.join(FIELDS)})", k)
        for k in ("key", "rule", "net", "layer", "reason", "by"):
            if k in e and (not isinstance(e[k], str) or not e[k].strip()):
                raise err(f"'{k}' must be a non-empty text in quotes", k)
        for k in ("reason", "by"):
            if k not in e:
                raise err(f"'{k}' is missing: every waiver says why and who decided", None)
        if "key" in e:
            for k in ("rule", "net", "layer"):
                if k in e:
                    raise err(f"give either 'key' or 'rule' with 'net', not both ('{k}' beside 'key')", k)
            problem = _rule_problem(e["key"].split("|", 1)[0], known)
            if problem:
                raise err(f"the key's rule: {problem}", "key")
        else:
            if "rule" not in e:
                raise err("give 'key' (one finding) or 'rule' with 'net' (a glob)", None)
            problem = _rule_problem(e["rule"], known)
            if problem:
                raise err(problem, "rule")
            if "net" not in e:
                raise err("'net' is missing: give the net name or a glob such as \"DDR_*\" (\"*\" for all)", None)
        until = _date(e["until"], src, i) if "until" in e else None
        out.append(Waiver(index=i + 1, line=src.block("waiver", i)[0] + 1, reason=e["reason"].strip(),
                          by=e["by"].strip(), key=e.get("key"), rule=e.get("rule"), net=e.get("net"),
                          layer=e.get("layer"), until=until))
    return out


def apply(findings: list[Finding], waivers: list[Waiver], today: dt.date,
          source: str = "") -> tuple[dict[str, Waiver], list[Finding]]:
    """(finding key -> the first live waiver covering it, findings about the waivers).

    An expired waiver covers nothing and is an error; a live one that covers nothing is an info.
    Findings about waivers are never waived themselves.
    """
    covered: dict[str, Waiver] = {}
    notes: list[Finding] = []
    where = f"{source}, " if source else ""
    # index once: a key waiver looks its finding up, a rule waiver scans only that rule's findings
    by_key: dict[str, list[Finding]] = {}
    by_rule: dict[str, list[Finding]] = {}
    for f in findings:
        if f.rule not in (EXPIRED_RULE, UNUSED_RULE):
            by_key.setdefault(finding_key(f), []).append(f)
            by_rule.setdefault(f.rule, []).append(f)
    for w in waivers:
        place = f"{where}waiver {w.index}" + (f" (line {w.line})" if w.line else "")
        if w.expired(today):
            notes.append(Finding(
                rule=EXPIRED_RULE, severity="error", net=w.net or _net_of(w.key), layer=w.layer or "",
                message=f"{place} for '{w.target}' expired on {w.until.isoformat()} ({w.describe()}); its "
                        "findings count again: renew it with a new date, or fix them",
                key=f"{EXPIRED_RULE}|{w.target}"))
            continue
        used = False
        for f in (by_key.get(w.key, []) if w.key is not None else by_rule.get(w.rule, [])):
            if not w.matches(f):
                continue
            used = True
            covered.setdefault(finding_key(f), w)
        if not used:
            notes.append(Finding(
                rule=UNUSED_RULE, severity="info", net=w.net or _net_of(w.key), layer=w.layer or "",
                message=f"{place} for '{w.target}' matches no finding of this review; remove it if the "
                        "finding was fixed",
                key=f"{UNUSED_RULE}|{w.target}"))
    # two waivers on one target would give two notes with one key: keep keys unique
    seen: dict[str, int] = {}
    for i, f in enumerate(notes):
        n = seen[f.key] = seen.get(f.key, 0) + 1
        if n > 1:
            notes[i] = replace(f, key=f"{f.key}|{n}")
    return covered, notes


def _net_of(key: str | None) -> str:
    parts = (key or "").split("|")
    return parts[1] if len(parts) > 1 else ""


def toml_string(s: str) -> str:
    """A TOML basic string: quotes, backslashes and control characters escaped."""
    out = ['"']
    for ch in s:
        if ch == '"':
            out.append('\\"')
        elif ch == "\\":
            out.append("\\\\")
        elif ord(ch) < 0x20 or ord(ch) == 0x7F:
            out.append(f"\\u{ord(ch):04X}")
        else:
            out.append(ch)
    out.append('"')
    return "".join(out)


def waivers_toml(decisions: list[dict], until: dt.date | None = None, source: str = "") -> str:
    """A waiver file from sign-off decisions: dicts with key, disposition, reviewer, comment (and rule, net,
    layer, message for the comment line above each entry)."""
    head = ["# Waivers from the sign-off" + (f" in {_one_line(source)}" if source else "") + ".",
            "# Each [[waiver]] lets one finding pass the CI gate (sicheck review --waivers THIS_FILE).", ""]
    out = head
    for d in decisions:
        what = " ".join(p for p in (d.get("severity"), d.get("rule"), d.get("net"), d.get("layer")) if p)
        out.append(f"# {d['disposition']}: {_one_line(what)}")
        out.append("[[waiver]]")
        out.append(f"key = {toml_string(d['key'])}")
        reason = d.get("comment") or DEFAULT_REASON[d["disposition"]]
        out.append(f"reason = {toml_string(reason)}")
        out.append(f"by = {toml_string(d['reviewer'])}")
        if until is not None:
            out.append(f"until = {until.isoformat()}")
        out.append("")
    return "\n".join(out)


def _one_line(s: str) -> str:
    """Text safe in a TOML comment: one line, no control characters."""
    return re.sub(r"[\x00-\x1f\x7f]", " ", s)
