"""`sicheck wave`: the receiver waveform of one line (or a chain of lines)."""

from __future__ import annotations

import json
import math
import sys
from pathlib import Path

from sicheck.errors import InputError
from sicheck.units import UnitError, parse_quantity


def _q(value: str | None, option: str, dim: str, default_unit: str | None = None, positive=True,
       allow_zero=False) -> float | None:
    if value is None:
        return None
    try:
        v = parse_quantity(value, dim, default_unit)
    except UnitError as e:
        raise InputError(f"{option}: {e}") from None
    if positive and not (v > 0 or (allow_zero and v == 0)):
        raise InputError(f"{option} must be {'zero or more' if allow_zero else 'positive'} (got {value})")
    return v


def run_wave(z0: list[str], delay: list[str], driver_ohm: str, swing: str, rise: str, series_ohm: str | None,
             load_pf: str | None, end_ohm: str | None, end_volts: str | None, end_cap: str | None, as_json: bool,
             plot: Path | None, end_up: str | None = None, end_down: str | None = None) -> None:
    from sicheck.physics.transient import Load, simulate, thevenin
    if len(z0) != len(delay):
        raise InputError("give one --delay for each --z0 (a chain of lines, driver end first)")
    zs = [_q(z, "--z0", "resistance", "ohm") for z in z0]
    tds = [_q(d, "--delay", "time") for d in delay]
    rd = _q(driver_ohm, "--driver-ohm", "resistance", "ohm", allow_zero=True)
    rs = _q(series_ohm, "--series-ohm", "resistance", "ohm", allow_zero=True) or 0.0
    if rd + rs <= 0:
        raise InputError("--driver-ohm plus --series-ohm must be above zero (an ideal source cannot be simulated)")
    v = _q(swing, "--swing", "voltage", "V")
    tr = _q(rise, "--rise", "time")
    cap = _q(load_pf, "--load-pf", "capacitance", "pF", allow_zero=True) or 0.0
    r_end = _q(end_ohm, "--end-ohm", "resistance", "ohm")
    v_end = _q(end_volts, "--end-volts", "voltage", "V", positive=False) or 0.0
    c_end = _q(end_cap, "--end-cap", "capacitance", "pF")
    if (end_volts is not None or end_cap is not None) and r_end is None:
        raise InputError("--end-volts and --end-cap need --end-ohm")
    if end_volts is not None and end_cap is not None:
        raise InputError("an RC termination (--end-cap) goes to ground; drop --end-volts")
    if (end_up is None) != (end_down is None):
        raise InputError("a Thevenin termination needs both --end-up and --end-down")
    if end_up is not None:
        if r_end is not None:
            raise InputError("give --end-ohm or the Thevenin pair (--end-up/--end-down), not both")
        r_end, v_end = thevenin(_q(end_up, "--end-up", "resistance", "ohm"),
                                _q(end_down, "--end-down", "resistance", "ohm"), v)
    if plot is not None:
        from sicheck.reports.atomic import refuse_inputs
        refuse_inputs(plot, [], "--plot")
    wf = simulate(zs, tds, v, tr, rd + rs, Load(cap=cap, end_ohm=r_end, end_volts=v_end, end_cap=c_end))
    m = {k: (None if isinstance(x, float) and math.isnan(x) else x) for k, x in wf.metrics.items()}
    if plot is not None:
        from sicheck.reports.plots import plot_waveform
        plot_waveform(wf, plot)
        m["plot"] = str(plot)
    if as_json:
        sys.stdout.write(json.dumps(m) + "\n")
        return
    from rich.console import Console
    con = Console(highlight=False)
    chain = " + ".join(f"{z:g} ohm/{t * 1e9:g} ns" for z, t in zip(zs, tds))
    con.print(f"[bold]wave[/bold] {chain}; driver {rd:g} ohm + series {rs:g} ohm; swing {v:g} V; rise "
              f"{tr * 1e12:g} ps (10-90 %)")
    for k, unit in (("v_final", "V"), ("v_max", "V"), ("overshoot_pct", "%"), ("ringback", "V"),
                    ("ringback_pct", "%"), ("settle_ns", "ns"), ("flight_ns", "ns")):
        val = m[k]
        con.print(f"  {k:<14} {'-' if val is None else f'{val:.4g}'} {unit}")
    if not m["settled_in_window"]:
        con.print("  [yellow]warning:[/] the receiver had not settled by the end of the simulated window")
    if plot is not None:
        con.print(f"  plot: {plot}")
