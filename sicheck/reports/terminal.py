"""The review's summary on the terminal (rich)."""

from __future__ import annotations

from rich.console import Console
from rich.table import Table

from sicheck.review import Review

STYLE = {"error": "bold red", "warning": "yellow", "info": "cyan"}


def _proposal(r) -> str:
    """The simulated choice with its effect, else the first-order advice."""
    part = getattr(r, "termination_part", "")
    if isinstance(part, str) and part:
        if r.recommended_termination == "none":
            return f"none needed (overshoot {r.before_overshoot_pct:.0f} %)"
        return (f"{part}: overshoot {r.before_overshoot_pct:.0f}->{r.after_overshoot_pct:.0f} %, "
                f"settle {r.before_settle_ns:.1f}->{r.after_settle_ns:.1f} ns")
    return r.proposal


def print_summary(rv: Review, console: Console, worst: int = 10) -> None:
    nets = rv.nets
    c = rv.counts
    console.print(f"[bold]sicheck review[/bold]  {rv.traces_source}  on  {rv.stackup.name}  "
                  f"(solver: {rv.solver}; {len(rv.segments)} segments, {len(nets)} nets, "
                  f"{len(rv.cross_sections)} cross-sections)")
    console.print(f"findings: [bold red]{c['error']} error[/]  [yellow]{c['warning']} warning[/]  "
                  f"[cyan]{c['info']} info[/]")
    counts = rv.net_counts        # a pair counts once
    console.print(f"nets: {counts['not-needed']} lumped, {counts['recommended']} termination recommended, "
                  f"{counts['required']} termination required")

    need = nets[nets["termination"] != "not-needed"].sort_values("td_over_tr", ascending=False)
    # a pair is shown once, by its longer leg
    seen, keep = set(), []
    for i, (net, pair) in enumerate(zip(need["net"], need["pair"])):
        key = frozenset((net, pair)) if pair else net
        keep.append(key not in seen)
        seen.add(key)
    need = need[keep]
    if len(need):
        t = Table(title="Nets that need termination", title_justify="left")
        for col in ("net", "length mm", "delay ps", "Tr ps", "TD/Tr", "termination", "proposal (simulated)"):
            t.add_column(col, overflow="fold")
        for r in need.head(worst).itertuples(index=False):
            t.add_row(f"{r.net}/{r.pair}" if r.pair else r.net, f"{r.length * 1e3:.1f}", f"{r.delay * 1e12:.0f}",
                      f"{r.rise_time * 1e12:.0f}", f"{r.td_over_tr:.2f}", r.termination, _proposal(r))
        if len(need) > worst:
            t.caption = f"... and {len(need) - worst} more (see the workbook's Nets sheet)"
        console.print(t)

    misses = [f for f in rv.findings if f.rule in ("z0-target", "zdiff-target")]
    if misses:
        t = Table(title="Worst impedance misses", title_justify="left")
        t.add_column("net")
        t.add_column("layer")
        t.add_column("finding", overflow="fold")

        def size(f):
            try:
                return -abs(float(f.message.rsplit("by ", 1)[1].rstrip(" %")))
            except (IndexError, ValueError):
                return 0.0
        for f in sorted(misses, key=size)[:worst]:
            t.add_row(f.net, f.layer, f.message)
        console.print(t)
    others = [f for f in rv.findings if f.severity in ("error", "warning") and f.rule not in
              ("z0-target", "zdiff-target", "electrical-length")]
    for f in others[:worst]:
        console.print(f"[{STYLE[f.severity]}]{f.severity}[/] {f.rule} {f.net} ({f.layer}): {f.message}")
    if len(others) > worst:
        console.print(f"... {len(others) - worst} more warnings in the workbook")
