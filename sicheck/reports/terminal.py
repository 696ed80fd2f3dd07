"""The review's summary on the terminal (rich)."""

from __future__ import annotations

from pathlib import Path

from rich import box
from rich.console import Console
from rich.markup import escape
from rich.table import Table

from sicheck.review import Review

STYLE = {"error": "bold red", "warning": "yellow", "info": "cyan"}


def _proposal(r) -> str:
    """The simulated choice with its effect on overshoot, else the short first-order advice (detail: workbook)."""
    part = getattr(r, "termination_part", "")
    if isinstance(part, str) and part:
        if r.recommended_termination == "none":
            return f"none needed (overshoot {r.before_overshoot_pct:.0f} %)"
        return f"{part}; overshoot {r.before_overshoot_pct:.0f}->{r.after_overshoot_pct:.0f} %"
    return r.proposal


def _pair_label(net: str, pair: str) -> str:
    """LASER_TRIG_P, LASER_TRIG_N -> "LASER_TRIG_P & N": the partner without the prefix both names share."""
    if not pair:
        return net
    k = 0
    while k < min(len(net), len(pair)) - 1 and net[k] == pair[k]:
        k += 1
    from sicheck.checks.engine import PAIR_SEP
    return f"{net}{PAIR_SEP}{pair[k:]}"


def _table(title: str) -> Table:
    return Table(title=title, title_justify="left", box=box.SIMPLE_HEAD, pad_edge=False, show_edge=False)


def print_summary(rv: Review, console: Console, worst: int = 10) -> None:
    """A summary that reads at 80 columns: each net on one or two lines; the detail is in the workbook."""
    nets = rv.nets
    c = rv.counts
    console.print(f"[bold]sicheck review[/bold] {escape(Path(rv.traces_source).name)} on "
                  f"{escape(rv.stackup.name)}")
    console.print(f"{rv.solver} solver; {len(rv.segments)} segments, {len(nets)} nets, "
                  f"{len(rv.cross_sections)} cross-sections")
    console.print(f"findings: [bold red]{c['error']} error[/]  [yellow]{c['warning']} warning[/]  "
                  f"[cyan]{c['info']} info[/]")
    counts = rv.net_counts        # a pair counts once
    console.print(f"nets: {counts['not-needed']} lumped, {counts['recommended']} termination recommended, "
                  f"{counts['required']} termination required")
    if "next_pct" in nets.columns and nets["next_pct"].notna().any():      # crosstalk inputs given
        x = nets[nets["next_pct"].notna()]
        ne, fe = x.loc[x["next_pct"].idxmax()], x.loc[x["fext_pct"].abs().idxmax()]
        console.print(f"crosstalk: {len(x)} nets; worst NEXT {ne['next_pct']:.2f} % {escape(ne['net'])}, "
                      f"FEXT {fe['fext_pct']:+.2f} % {escape(fe['net'])}")

    shown = [k for k in ("net", "pair", "length", "td_over_tr", "termination", "proposal", "termination_part",
                         "recommended_termination", "before_overshoot_pct", "after_overshoot_pct") if k in nets.columns]
    need = nets.loc[nets["termination"] != "not-needed", shown].sort_values("td_over_tr", ascending=False)
    # a pair is shown once, by its longer leg
    seen, keep = set(), []
    for net, pair in zip(need["net"].tolist(), need["pair"].tolist()):     # lists: a column iterates slowly
        key = frozenset((net, pair)) if pair else net
        keep.append(key not in seen)
        seen.add(key)
    need = need[keep]
    if len(need):
        t = _table("Nets that need termination")
        t.add_column("net", no_wrap=True, overflow="ellipsis", max_width=24)
        t.add_column("mm", justify="right", no_wrap=True)
        t.add_column("TD/Tr", justify="right", no_wrap=True)
        t.add_column("need", no_wrap=True)
        t.add_column("proposal (simulated)", overflow="fold", ratio=1)
        for r in need.head(worst).itertuples(index=False):
            t.add_row(escape(_pair_label(r.net, r.pair)), f"{r.length * 1e3:.0f}", f"{r.td_over_tr:.2f}",
                      "req" if r.termination == "required" else "rec", escape(_proposal(r)))
        t.caption = ("req: termination required, rec: recommended"
                     + (f"; {len(need) - worst} more" if len(need) > worst else "")
                     + "; details in the workbook's Nets sheet")
        t.caption_justify = "left"
        console.print(t)

    misses = [f for f in rv.findings if f.rule in ("z0-target", "zdiff-target")]
    if misses:
        t = _table("Worst impedance misses")
        t.add_column("net", no_wrap=True, overflow="ellipsis", max_width=24)
        t.add_column("layer", no_wrap=True, overflow="ellipsis", max_width=10)
        t.add_column("finding", overflow="fold", ratio=1)

        def size(f):
            try:
                return -abs(float(f.message.rsplit("by ", 1)[1].rstrip(" %")))
            except (IndexError, ValueError):
                return 0.0
        for f in sorted(misses, key=size)[:worst]:
            t.add_row(escape(f.net), escape(f.layer), escape(f.message))
        console.print(t)
    others = [f for f in rv.findings if f.severity in ("error", "warning") and f.rule not in
              ("z0-target", "zdiff-target", "electrical-length")]
    for f in others[:worst]:
        console.print(f"[{STYLE[f.severity]}]{f.severity}[/] {f.rule} {escape(f.net)} ({escape(f.layer)}): "
                      f"{escape(f.message)}")
    if len(others) > worst:
        console.print(f"... {len(others) - worst} more warnings in the workbook")
