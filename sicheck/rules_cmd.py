"""`sicheck rules`: every registered check with its parameters in effect, and the net classes."""

from __future__ import annotations

from pathlib import Path


def _g(v, scale=1.0, suffix=""):
    return "" if v is None else f"{v * scale:g}{suffix}"


def run_rules(rules: list[Path] | None) -> int:
    from rich.console import Console
    from rich.markup import escape
    from rich.table import Table

    from sicheck.checks import CHECKS, SETTINGS
    from sicheck.rules import UNCLASSIFIED, load_rule_sets
    rs = load_rule_sets(rules)
    con = Console(highlight=False)
    con.print(escape(f"rule sets: {', '.join(rs.sources)}"))
    t = Table(title="Checks", title_justify="left")
    t.add_column("rule", no_wrap=True)
    t.add_column("severity", no_wrap=True)
    t.add_column("what it checks", overflow="fold")
    for c in CHECKS:
        t.add_row(c.id, rs.severity[c.id], c.summary)
    con.print(t)
    con.print("[i]Parameters[/i] (value in effect, where it can be set: meaning)")
    for c in CHECKS:
        if c.params:
            con.print(f"  [bold]{c.id}[/bold]")
        for p in c.params:
            con.print(escape(f"    {p.name} = {p.shown(rs.value(p.name))}  ({p.where}): {p.help}"))
    con.print("  [bold]other settings[/bold]")
    for p in SETTINGS:
        con.print(escape(f"    {p.name} = {p.shown(rs.value(p.name))}  ({p.where}): {p.help}"))
    t = Table(title="Net classes", title_justify="left")
    for col in ("class", "match", "Z0", "Zdiff", "tol %", "rise time", "width", "gap", "driver"):
        t.add_column(col, overflow="fold")
    for c in rs.classes:
        t.add_row(c.name, " ".join(c.match), _g(c.z0), _g(c.zdiff), _g(rs.tolerance_for(c)),
                  _g(c.rise_time, 1e12, " ps"), _g(c.width, 1e3, " mm"), _g(c.gap, 1e3, " mm"),
                  _g(c.driver_ohm, 1, " ohm"))
    con.print(t)
    con.print(f"Nets that match no class are in class '{UNCLASSIFIED}'.")
    for g in rs.match_groups:
        con.print(escape(f"match group {g.name}: {' '.join(g.match) or '(match_group column)'}, max_skew "
                         f"{g.max_skew * 1e12:g} ps" + (f", reference {g.reference}" if g.reference else "")))
    for where, note in rs.notes:
        con.print(escape(f"note: {where}: {note}"))
    return 0
