"""`sicheck wave`: the receiver waveform of one line (or a chain of lines), lossless or lossy."""

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


DEFAULT_DIELECTRIC_SHARE = 0.5    # see README (sicheck line: 45-56 % on 50 ohm FR-4 lines at 1 GHz)


def _loss_at(text: str) -> tuple[float, float]:
    """'4dB@1GHz' -> (4.0 dB, 1e9 Hz)."""
    from sicheck.units import option_frequency
    if text.count("@") != 1:
        raise InputError(f"--loss: write the line's insertion loss at a frequency as DB@FREQ, e.g. 4dB@1GHz "
                         f"(got {text!r})")
    db_text, f_text = (x.strip() for x in text.split("@"))
    if db_text.lower().endswith("db"):
        db_text = db_text[:-2].strip()
    try:
        db = float(db_text)
    except ValueError:
        raise InputError(f"--loss: {db_text!r} is not a number of dB (e.g. 4dB@1GHz)") from None
    if not (0.0 <= db <= 100.0):
        raise InputError(f"--loss: {db:g} dB is outside 0-100 dB")
    return db, option_frequency(f_text, "--loss")


def _per_line(values: list[str] | None, option: str, n: int) -> list[str] | None:
    if not values:
        return None
    if len(values) == 1:
        return values * n
    if len(values) != n:
        raise InputError(f"give {option} once for all lines or once per --z0 ({n}), not {len(values)} times")
    return values


def _line_losses(zs, tds, loss, share, rdc):
    """One LineLoss (or None) per line from --loss, --dielectric-share and --rdc."""
    from sicheck.physics.causal_line import loss_from_db
    n = len(zs)
    if not loss:
        if share or rdc:
            raise InputError("--dielectric-share and --rdc describe a line's loss: give --loss too")
        return [None] * n, None
    if len(loss) != n:
        raise InputError(f"give one --loss per --z0 ({n} lines, {len(loss)} --loss); 0dB@1GHz for a lossless one")
    shares = []
    for text in _per_line(share, "--dielectric-share", n) or [str(DEFAULT_DIELECTRIC_SHARE)] * n:
        try:
            f = float(text)
        except ValueError:
            raise InputError(f"--dielectric-share: {text!r} is not a number between 0 and 1") from None
        if not 0.0 <= f <= 1.0:
            raise InputError(f"--dielectric-share must be between 0 and 1 (got {text})")
        shares.append(f)
    rdcs = [_q(r, "--rdc", "resistance", "ohm", allow_zero=True) for r in (_per_line(rdc, "--rdc", n) or ["0"] * n)]
    out, used = [], []
    for z, td, text, f_share, r in zip(zs, tds, loss, shares, rdcs):
        db, f = _loss_at(text)
        if r > 1e4:
            raise InputError(f"--rdc {r:g} ohm is out of range (0-10 kohm)")
        lo = None if db == 0.0 and r == 0.0 else loss_from_db(z, td, db, f, f_share, r)
        if lo is not None and lo.tan_delta >= 1.0:
            raise InputError(f"--loss {text}: the dielectric part would need a loss tangent above 1; check the loss "
                             "and --dielectric-share")
        out.append(lo)
        used.append({"loss_db": db, "freq_hz": f, "dielectric_share": f_share, "rdc_ohm": r,
                     "r_ac_ohm": None if lo is None else lo.r_ac, "tan_delta": None if lo is None else lo.tan_delta})
    return out, used


def run_wave(z0: list[str], delay: list[str], driver_ohm: str, swing: str, rise: str, series_ohm: str | None,
             load_pf: str | None, end_ohm: str | None, end_volts: str | None, end_cap: str | None, as_json: bool,
             plot: Path | None, end_up: str | None = None, end_down: str | None = None,
             loss: list[str] | None = None, dielectric_share: list[str] | None = None,
             rdc: list[str] | None = None) -> None:
    from sicheck.physics.causal_line import Line
    from sicheck.physics.line_network import simulate_chain
    from sicheck.physics.transient import Load, thevenin
    if len(z0) != len(delay):
        raise InputError("give one --delay for each --z0 (a chain of lines, driver end first)")
    zs = [_q(z, "--z0", "resistance", "ohm") for z in z0]
    tds = [_q(d, "--delay", "time") for d in delay]
    losses, loss_used = _line_losses(zs, tds, loss, dielectric_share, rdc)
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
    if tr < 1e-12:
        raise InputError(f"--rise {rise} is below 1 ps")
    try:
        wf = simulate_chain([Line(z, t, lo) for z, t, lo in zip(zs, tds, losses)], v, tr, rd + rs,
                            Load(cap=cap, end_ohm=r_end, end_volts=v_end, end_cap=c_end))
    except ValueError as e:
        raise InputError(f"cannot simulate this: {e}") from None
    m = {k: (None if isinstance(x, float) and math.isnan(x) else x) for k, x in wf.metrics.items()}
    m["loss_included"] = loss_used is not None
    if loss_used is not None:
        m["lines"] = loss_used
    if plot is not None:
        from sicheck.reports.plots import plot_waveform
        plot_waveform(wf, plot)
        m["plot"] = str(plot)
    if as_json:
        sys.stdout.write(json.dumps(m) + "\n")
        return
    from rich.console import Console
    con = Console(highlight=False)
    chain = " + ".join(f"{z:g} ohm/{t * 1e9:g} ns" + ("" if lo is None else f" ({u['loss_db']:g} dB at "
                                                         f"{u['freq_hz'] * 1e-9:g} GHz)")
                       for z, t, lo, u in zip(zs, tds, losses, loss_used or [None] * len(zs)))
    con.print(f"[bold]wave[/bold] {chain}; driver {rd:g} ohm + series {rs:g} ohm; swing {v:g} V; rise "
              f"{tr * 1e12:g} ps (10-90 %); {'with loss' if loss_used else 'lossless'}")
    for k, unit in (("v_final", "V"), ("v_max", "V"), ("overshoot_pct", "%"), ("ringback", "V"),
                    ("ringback_pct", "%"), ("settle_ns", "ns"), ("flight_ns", "ns")):
        val = m[k]
        con.print(f"  {k:<14} {'-' if val is None else f'{val:.4g}'} {unit}")
    if not m["settled_in_window"]:
        con.print("  [yellow]warning:[/] the receiver had not settled by the end of the simulated window")
    if plot is not None:
        con.print(f"  plot: {plot}")
