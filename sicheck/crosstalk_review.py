"""Crosstalk in the review: per segment, per net, per listed coupling, and its findings.

Inputs, from coarse to exact (all optional):
  * a net class's ``spacing``: the clearance its nets keep to other nets on the same layer;
  * trace-list columns ``spacing`` (to the nearest aggressor along that segment) and
    ``parallel`` (the coupled length; default the segment's length);
  * ``--coupling FILE``: rows of victim, aggressor, layer, spacing, length.

Each unique (layer, width, spacing) is solved once as a symmetric coupled pair (victim
and one aggressor of the same width; a pair's leg is taken as a single victim line)
with the review's solver, and sicheck.physics.crosstalk gives the numbers. The
aggressor's edge is its own rise time when it is a known net, else the victim's.

This module only computes tables; review.py calls it, and the `crosstalk` check
(sicheck/checks/crosstalk.py) turns the figures into findings.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable

import numpy as np
import pandas as pd

from sicheck.errors import InputError
from sicheck.physics import crosstalk as xt
from sicheck.physics.cross_section import CrossSection
from sicheck.physics.line_result import LineResult

ANY_NEIGHBOUR = "any neighbour at the class spacing"
TRACE_LIST_NEIGHBOUR = "the nearest neighbour (trace-list spacing)"
Solver = Callable[[list[CrossSection]], list[LineResult]]


@dataclass
class CrosstalkTables:
    """What the review keeps for the reports."""

    sections: pd.DataFrame                      # one row per unique (layer, width, spacing)
    couplings: pd.DataFrame | None = None       # the --coupling rows with their numbers
    notes: list[str] = field(default_factory=list)
    solver: Solver | None = None                # the review's solver, for the check's spacing search
    waves: list[dict] = field(default_factory=list)   # the worst couplings simulated with their real ends

    def _index(self, layer, width, spacing) -> int:
        return int(_lookup(self.sections, [layer], [width], [spacing])[0])

    def volts_text(self, ctx, class_name: str, layer, width, spacing, ne, fe) -> str:
        """The noise in mV for the class's swing and driver (the [waveform] defaults when it gives none)."""
        i = self._index(layer, width, spacing)
        if i < 0:
            return ""
        c = ctx.net_class(class_name) if class_name else None
        swing = c.swing if c is not None and c.swing is not None else ctx.param("swing")
        rd = c.driver_ohm if c is not None and c.driver_ohm is not None else ctx.param("driver_ohm")
        step = float(xt.launched_step(swing, self.sections["z_line"].iat[i], rd))
        return (f" (about {ne * step * 10:.0f} mV and {fe * step * 10:+.0f} mV of a {step:.2f} V step: {swing:g} V "
                f"through {rd:g} ohm)")

    def cautions(self, layer, width, spacing) -> list[str]:
        i = self._index(layer, width, spacing)
        return [] if i < 0 else xt.validity_warnings(float(self.sections["kb"].iat[i]))


# ------------------------------------------------------------------ the --coupling file

COUPLING_COLUMNS = ("victim", "aggressor", "layer", "spacing", "length")


def read_couplings(path: str | Path, units: dict[str, str] | None = None, sheet: str | None = None) -> pd.DataFrame:
    """victim, aggressor, layer, spacing (m), length (m), row: the same unit and error rules as the trace list."""
    from sicheck.traces import _numeric_column, _read_csv, _read_xlsx, normalise_header
    path = Path(path)
    src = str(path)
    if not path.exists():
        raise InputError("coupling file not found", file=src)
    suffix = path.suffix.lower()
    delim = None
    if suffix in (".xlsx", ".xlsm"):
        raw = _read_xlsx(path, sheet)
    elif suffix in (".csv", ".txt", ".tsv", ""):
        raw, delim = _read_csv(path)
    else:
        raise InputError(f"unknown coupling-file type '{suffix}': use .csv or .xlsx", file=src)
    header = raw.attrs["header"]
    found: dict[str, tuple[int, str | None, str]] = {}
    for j, h in enumerate(header):
        key, unit = normalise_header(h)
        if key in COUPLING_COLUMNS:
            if key in found:
                raise InputError(f"two columns mean '{key}'", file=src, row=raw.attrs["header_row"], column=h)
            found[key] = (j, unit, h)
    for c in COUPLING_COLUMNS:
        if c not in found:
            raise InputError(f"missing column '{c}' (a coupling file has {', '.join(COUPLING_COLUMNS)})", file=src,
                             row=raw.attrs["header_row"])
    rows = raw["__row"]
    if len(raw) == 0:
        raise InputError("the coupling file has a header but no rows", file=src)
    out = pd.DataFrame({"row": rows.to_numpy(dtype=int)})
    for c in ("victim", "aggressor", "layer"):
        j, _, label = found[c]
        text = raw[j].map(lambda v: "" if v is None else str(v)).str.strip()
        blank = (text == "").to_numpy()
        if blank.any():
            i = int(np.argmax(blank))
            raise InputError(f"'{c}' is empty", file=src, row=int(rows.iloc[i]), column=label)
        out[c] = text.to_numpy()
    for c, canon in (("spacing", "spacing"), ("length", "parallel")):
        j, unit, label = found[c]
        vals = _numeric_column(raw[j], rows, canon, label, unit, units or {}, delim == ";", src)
        if np.isnan(vals).any():
            i = int(np.argmax(np.isnan(vals)))
            raise InputError(f"'{c}' is empty", file=src, row=int(rows.iloc[i]), column=label)
        out[c] = vals
    out.attrs["source"] = src
    out.attrs["labels"] = {c: found[c][2] for c in COUPLING_COLUMNS}
    return out


# ------------------------------------------------------------------ solving

def solve_couplings(stackup, keys: list[tuple[str, float, float]], solver: Solver) -> pd.DataFrame:
    """One coupled solve per unique (layer, width, spacing): the coefficients as a table."""
    xs = [stackup.cross_section(layer, w, s) for layer, w, s in keys]
    results = solver(xs) if xs else []
    ze = np.array([r.z_even for r in results], dtype=float)
    zo = np.array([r.z_odd for r in results], dtype=float)
    ee = np.array([r.eps_even for r in results], dtype=float)
    eo = np.array([r.eps_odd for r in results], dtype=float)
    c = xt.coupling_from_modes(ze, zo, ee, eo)
    return pd.DataFrame({
        "layer": [k[0] for k in keys], "kind": [x.kind for x in xs], "width": [k[1] for k in keys],
        "spacing": [k[2] for k in keys], "kb": c.kb, "kf": c.kf, "kf_s_per_m": c.kf_s_per_m,
        "lm_over_ls": c.lm / c.ls, "cm_over_cs": c.cm / c.cs, "delay_per_m": c.delay_per_m, "z_line": c.z_line,
        "ls": c.ls, "lm": c.lm, "cs": c.cs, "cm": c.cm,
        "model": [r.model for r in results], "uncertainty_pct": [r.uncertainty_pct for r in results],
    })


def _lookup(sections: pd.DataFrame, layer, width, spacing) -> np.ndarray:
    idx = pd.MultiIndex.from_frame(sections[["layer", "width", "spacing"]])
    return idx.get_indexer(pd.MultiIndex.from_arrays([layer, width, spacing]))


def add_segment_crosstalk(seg: pd.DataFrame, df: pd.DataFrame, rules, stackup, solver: Solver,
                          couplings: pd.DataFrame | None = None) -> CrosstalkTables | None:
    """Adds spacing, parallel, next_pct, fext_pct, xt_aggressor to ``seg`` (in place); None without inputs."""
    class_spacing = {c.name: c.spacing for c in rules.classes if c.spacing is not None}
    sp = df["spacing"].to_numpy(float).copy() if "spacing" in df else np.full(len(seg), np.nan)
    par = df["parallel"].to_numpy(float).copy() if "parallel" in df else np.full(len(seg), np.nan)
    from_class = np.isnan(sp)
    sp[from_class] = seg["net_class"].map(class_spacing).to_numpy(float)[from_class]      # NaN: no class spacing
    par = np.where(np.isnan(par), seg["length"].to_numpy(float), par)
    has = ~np.isnan(sp)
    if not has.any() and couplings is None:
        return None
    keys = list(dict.fromkeys(zip(seg["layer"][has], seg["width"][has], sp[has])))
    if couplings is not None:
        keys += [k for k in dict.fromkeys(zip(couplings["layer"], couplings["width"], couplings["spacing"]))
                 if k not in keys]
    sections = solve_couplings(stackup, keys, solver)
    seg["spacing"] = sp
    seg["parallel"] = np.where(has, par, np.nan)
    seg["xt_aggressor"] = np.where(has, np.where(from_class, ANY_NEIGHBOUR, TRACE_LIST_NEIGHBOUR), "")
    i = _lookup(sections, seg["layer"].to_numpy(), seg["width"].to_numpy(float), sp)
    ok = has & (i >= 0)
    kb = np.where(ok, sections["kb"].to_numpy()[np.maximum(i, 0)], np.nan)
    kf = np.where(ok, sections["kf"].to_numpy()[np.maximum(i, 0)], np.nan)
    dpm = np.where(ok, sections["delay_per_m"].to_numpy()[np.maximum(i, 0)], np.nan)
    # no known aggressor here: the edge is the victim's own (worst case, said in the finding)
    rise = seg["rise_time"].to_numpy(float)
    net_rise = seg.groupby("net")["rise_time"].transform("min").to_numpy(float)
    rise = np.where(np.isnan(net_rise), rise, net_rise)
    with np.errstate(invalid="ignore"):
        seg["next_pct"] = xt.next_fraction(kb, par, dpm, rise) * 100.0
        seg["fext_pct"] = xt.fext_fraction(kf, par, dpm, rise) * 100.0
    seg["xt_rise"] = np.where(ok, rise, np.nan)
    return CrosstalkTables(sections=sections, solver=solver)


def attach_couplings(tables: CrosstalkTables, couplings: pd.DataFrame, seg: pd.DataFrame,
                     net_rise: dict[str, float]) -> None:
    """Numbers for each --coupling row (the victim's width on that layer already in ``couplings``)."""
    s = tables.sections
    i = _lookup(s, couplings["layer"].to_numpy(), couplings["width"].to_numpy(float),
                couplings["spacing"].to_numpy(float))
    known = couplings["aggressor"].map(lambda a: a in net_rise).to_numpy(bool)
    rise = np.where(known, couplings["aggressor"].map(lambda a: net_rise.get(a, np.nan)).to_numpy(float),
                    couplings["victim"].map(net_rise).to_numpy(float))
    c = couplings.copy()
    c["kb"] = s["kb"].to_numpy()[i]
    c["kf"] = s["kf"].to_numpy()[i]
    c["rise"] = rise
    c["edge_from"] = np.where(known, "aggressor", "victim (aggressor not in the trace list)")
    c["next_pct"] = xt.next_fraction(c["kb"], c["length"], s["delay_per_m"].to_numpy()[i], rise) * 100.0
    c["fext_pct"] = xt.fext_fraction(c["kf"], c["length"], s["delay_per_m"].to_numpy()[i], rise) * 100.0
    tables.couplings = c


def prepare_couplings(couplings: pd.DataFrame, seg: pd.DataFrame, stackup) -> pd.DataFrame:
    """Checks a --coupling table against the board and gives each row the victim's width on its layer."""
    src = couplings.attrs.get("source")
    labels = couplings.attrs.get("labels", {})
    names = {l.name.lower(): l.name for l in stackup.signal_layers}
    # a pair's partner listed only through its `pair` column is a net too: its leg has the same width
    legs = pd.concat([seg[["net", "layer", "width"]],
                      seg.loc[seg["pair"] != "", ["pair", "layer", "width"]].rename(columns={"pair": "net"})])
    widths = legs.groupby(["net", "layer"], sort=False)["width"].min().to_dict()
    nets = set(legs["net"])
    lay, wid = [], []
    for r in couplings.itertuples(index=False):
        layer = names.get(r.layer.lower())
        if layer is None:
            raise InputError(f"layer '{r.layer}' is not a signal layer of the stackup ({', '.join(names.values())})",
                             file=src, row=int(r.row), column=labels.get("layer", "layer"))
        if r.victim not in nets:
            raise InputError(f"victim '{r.victim}' is not a net of the trace list", file=src, row=int(r.row),
                             column=labels.get("victim", "victim"))
        w = widths.get((r.victim, layer))
        if w is None:
            raise InputError(f"victim '{r.victim}' has no segment on layer {layer}", file=src, row=int(r.row),
                             column=labels.get("layer", "layer"))
        lay.append(layer)
        wid.append(w)
    out = couplings.copy()
    out["layer"] = lay
    out["width"] = wid
    return out


def add_net_crosstalk(nets: pd.DataFrame, all_seg: pd.DataFrame, tables: CrosstalkTables | None) -> None:
    """Each net's worst near-end and far-end figure over its segments and listed couplings (in place)."""
    if tables is None or "next_pct" not in all_seg:
        return
    parts = [all_seg[["net", "next_pct", "fext_pct"]]]
    if tables.couplings is not None:
        parts.append(tables.couplings.rename(columns={"victim": "net"})[["net", "next_pct", "fext_pct"]])
    allx = pd.concat(parts, ignore_index=True)
    allx = allx[allx["next_pct"].notna()].reset_index(drop=True)     # segments without a spacing
    allx["abs_fext"] = allx["fext_pct"].abs()
    g = allx.groupby("net")
    worst_next = g["next_pct"].max()
    idx = g["abs_fext"].idxmax().dropna()
    worst_fext = pd.Series(allx.loc[idx.astype(int), "fext_pct"].to_numpy(), index=idx.index)
    nets["next_pct"] = nets["net"].map(worst_next).to_numpy(float)
    nets["fext_pct"] = nets["net"].map(worst_fext).to_numpy(float)


# ------------------------------------------------------------------ waveforms of the worst couplings

MAX_WAVES = 3          # couplings simulated with their real ends (the worst by peak noise in %)


def add_waves(tables: CrosstalkTables | None, seg: pd.DataFrame, rules, max_waves: int = MAX_WAVES) -> None:
    """The victim's near- and far-end noise of the worst few couplings with the real ends (in ``tables.waves``).

    Ends: the aggressor's driver (swing behind its driver_ohm) at its near end, the victim's quiet driver
    (its driver_ohm) at its near end, and the receivers' load_pf at both far ends; class values, else the
    [waveform] defaults. An aggressor that is not a net of the trace list gets the victim's values.
    Only the coupled run is modelled (sicheck.physics.coupled_wave): its ends are taken as the nets' ends.
    """
    if tables is None:
        return
    from sicheck.physics.coupled_wave import End, coupled_pair_waves
    cases = []        # (peak %, victim, aggressor, layer, width, spacing, length, rise)
    if "next_pct" in seg:
        s = seg[~seg["mirrored"].astype(bool) & seg["next_pct"].notna()]
        for r in s.itertuples(index=False):
            cases.append((max(r.next_pct, abs(r.fext_pct)), r.net, r.xt_aggressor, r.layer, r.width, r.spacing,
                          r.parallel, r.xt_rise))
    if tables.couplings is not None:
        for r in tables.couplings.itertuples(index=False):
            cases.append((max(r.next_pct, abs(r.fext_pct)), r.victim, r.aggressor, r.layer, r.width, r.spacing,
                          r.length, r.rise))
    cases.sort(key=lambda c: -c[0])
    first = seg.drop_duplicates("net").set_index("net")
    cls = {c.name: c for c in rules.classes}

    def ends(net):
        """(swing V, driver ohm, load F) of a net: its rows, its class, else the [waveform] defaults."""
        row = first.loc[net] if net in first.index else None
        c = cls.get(row["net_class"]) if row is not None else None
        swing = c.swing if c is not None and c.swing is not None else rules.swing
        drv = float(row["driver_ohm"]) if row is not None and np.isfinite(row["driver_ohm"]) else rules.driver_ohm
        load = float(row["load_pf"]) if row is not None and np.isfinite(row["load_pf"]) else rules.load_pf
        return float(swing), float(drv), float(load) * 1e-12

    done: set = set()
    for (_, victim, aggr, layer, w, sp, length, rise) in cases:
        if len(tables.waves) >= max_waves:
            break
        i = int(_lookup(tables.sections, [layer], [w], [sp])[0])
        if victim in done or i < 0 or not np.isfinite(rise) or not length > 0:
            continue
        done.add(victim)
        sec = tables.sections.iloc[i]
        _, r_victim, c_victim = ends(victim)
        swing, r_aggr, c_aggr = ends(aggr if aggr in first.index else victim)
        wv = coupled_pair_waves(float(sec["ls"]), float(sec["lm"]), float(sec["cs"]), float(sec["cm"]), float(length),
                                float(rise), swing, r_aggr, End(r=r_victim), End(c=c_victim), End(c=c_aggr))
        near = float(wv.victim_near[np.argmax(np.abs(wv.victim_near))])
        far = float(wv.victim_far[np.argmax(np.abs(wv.victim_far))])
        tables.waves.append({"victim": victim, "aggressor": aggr, "layer": layer, "width": float(w),
                             "spacing": float(sp), "length": float(length), "rise": float(rise), "swing": swing,
                             "aggressor_driver_ohm": r_aggr, "victim_driver_ohm": r_victim, "victim_load": c_victim,
                             "aggressor_load": c_aggr,
                             "near_peak_v": near, "far_peak_v": far, "t": wv.t, "near": wv.victim_near,
                             "far": wv.victim_far})
