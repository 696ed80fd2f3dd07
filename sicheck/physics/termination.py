"""Termination advice with values (first-order, before the waveform check).

Schemes (Johnson & Graham 1993, ch. 6): series resistor at the source, R = Z0 - Rdrv;
parallel resistor at the far end to a termination voltage, R = Z0; Thevenin pair at
the far end whose parallel value is Z0 (2 Z0 each for a mid-rail split); RC at the far
end, R = Z0 and a capacitor whose time constant covers the round trip (common practice:
R C >= 3 x 2 TD). A differential pair takes a resistor of Zdiff across the receiver.
Values snap to IEC 60063 series: resistors E24, capacitors E12.
"""

from __future__ import annotations

from dataclasses import dataclass

from sicheck.physics import eseries


@dataclass(frozen=True)
class Advice:
    scheme: str             # "series" | "parallel" | "thevenin" | "rc" | "differential" | "none"
    text: str
    series_ohm: float | None = None
    end_ohm: float | None = None
    end_cap_f: float | None = None


def series_value(z0: float, driver_ohm: float) -> float | None:
    """E24 series resistor for Z0 - Rdrv, or None when the driver is already >= Z0."""
    need = z0 - driver_ohm
    if need < 1.0:          # below 1 ohm no part helps; the driver already matches
        return None
    return eseries.nearest(need, "E24")


def advise(z0: float, delay: float, driver_ohm: float | None, zdiff: float | None = None) -> list[Advice]:
    """Ranked termination options for a net that needs one."""
    if zdiff is not None:
        r = eseries.nearest(zdiff, "E24")
        return [Advice("differential", f"{r:g} ohm across the receiver pins (Zdiff {zdiff:.1f} ohm)", end_ohm=r)]
    out: list[Advice] = []
    r_par = eseries.nearest(z0, "E24")
    r_thev = eseries.nearest(2.0 * z0, "E24")
    c_rc = eseries.at_least(3.0 * 2.0 * delay / z0, "E12")
    if driver_ohm is not None:
        rs = series_value(z0, driver_ohm)
        if rs is None:
            out.append(Advice("none", f"driver {driver_ohm:g} ohm already >= Z0 {z0:.1f} ohm; no series part"))
        else:
            out.append(Advice("series", f"{rs:g} ohm in series at the driver (Z0 {z0:.1f} - Rdrv {driver_ohm:g} ohm)",
                              series_ohm=rs))
    else:
        out.append(Advice("series", f"series resistor at the driver of Z0 - Rdrv (Z0 {z0:.1f} ohm; driver "
                                    "impedance not given)"))
    out.append(Advice("parallel", f"{r_par:g} ohm at the far end to the termination voltage", end_ohm=r_par))
    out.append(Advice("thevenin", f"{r_thev:g} ohm to supply and {r_thev:g} ohm to ground at the far end",
                      end_ohm=r_thev))
    out.append(Advice("rc", f"{r_par:g} ohm + {c_rc * 1e12:g} pF to ground at the far end",
                      end_ohm=r_par, end_cap_f=c_rc))
    return out
