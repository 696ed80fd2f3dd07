"""The review: trace list + stackup + rules -> segments, nets and findings.

Pure orchestration over tables; no printing, no files. Each unique cross-section
(layer, width, gap) is solved once and mapped back to its segments.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Callable

import numpy as np
import pandas as pd

from sicheck.errors import InputError
from sicheck.findings import SEVERITY_ORDER, Finding
from sicheck.physics import electrical, termination
from sicheck.physics.cross_section import CrossSection
from sicheck.physics.formula import solve_formula
from sicheck.physics.line_result import LineResult, per_length
from sicheck.rules import Rules
from sicheck.stackup import Stackup
from sicheck.traces import TraceList

Solver = Callable[[list[CrossSection]], list[LineResult]]


@dataclass
class Review:
    segments: pd.DataFrame
    nets: pd.DataFrame
    findings: list[Finding]
    stackup: Stackup
    rules: Rules
    traces_source: str
    solver: str
    cross_sections: list[tuple[str, CrossSection, LineResult]] = field(default_factory=list)
    waves: dict = field(default_factory=dict)     # net -> ((t, v) before, (t, v) after, v_final)
    crosstalk: object = None                      # crosstalk_review.CrosstalkTables when spacings were given

    @property
    def counts(self) -> dict[str, int]:
        c = {"error": 0, "warning": 0, "info": 0}
        for f in self.findings:
            c[f.severity] += 1
        return c

    @property
    def exit_code(self) -> int:
        return 1 if self.counts["error"] else 0


def _resolve_classes(df: pd.DataFrame, rules: Rules, src: str) -> pd.DataFrame:
    names = []
    cache: dict[tuple[str, str], str] = {}
    for net, explicit, row in zip(df["net"], df["net_class"], df["row"]):
        key = (net, explicit)
        if key not in cache:
            cls = rules.class_for(net, explicit or None)
            if explicit and cls is None:
                known = ", ".join(c.name for c in rules.classes) or "none"
                raise InputError(f"net class '{explicit}' is not in the rules (classes: {known})",
                                 file=src, row=int(row), column="net_class")
            cache[key] = cls.name if cls else ""
        names.append(cache[key])
    df = df.copy()
    df["net_class"] = names
    return df


def _class_value(df: pd.DataFrame, rules: Rules, column: str, attr: str) -> np.ndarray:
    vals = df[column].to_numpy(float).copy()
    missing = np.isnan(vals)
    if missing.any():
        by_class = {c.name: getattr(c, attr) for c in rules.classes}
        fill = df["net_class"].map(lambda n: by_class.get(n)).to_numpy(object)
        fill = np.array([np.nan if v is None else v for v in fill], dtype=float)
        vals[missing] = fill[missing]
    return vals


def _check_pairs(df: pd.DataFrame, src: str) -> None:
    nets = set(df["net"])
    for net, partner, row in zip(df["net"], df["pair"], df["row"]):
        if partner and partner == net:
            raise InputError(f"net '{net}' is paired with itself", file=src, row=int(row), column="pair")
    # A partner that lists its own rows must name this net back.
    back = df[df["pair"] != ""].groupby("net")["pair"].first().to_dict()
    for net, partner in back.items():
        if partner in nets and partner in back and back[partner] != net:
            row = int(df.loc[df["net"] == net, "row"].iloc[0])
            raise InputError(f"net '{net}' pairs with '{partner}', but '{partner}' pairs with '{back[partner]}'",
                             file=src, row=row, column="pair")


def build_review(traces: TraceList, stackup: Stackup, rules: Rules, solver: Solver = solve_formula,
                 solver_name: str = "formula", waveforms: bool = True,
                 couplings: pd.DataFrame | None = None) -> Review:
    src = traces.source
    df = traces.frame.copy()
    # layers
    layer_names = {l.name.lower(): l.name for l in stackup.signal_layers}
    canon_layer = df["layer"].str.lower().map(layer_names)
    unknown = canon_layer.isna().to_numpy()
    if unknown.any():
        i = int(np.argmax(unknown))
        raise InputError(f"layer '{df['layer'].iloc[i]}' is not a signal layer of the stackup "
                         f"({', '.join(layer_names.values())})", file=src, row=int(df["row"].iloc[i]), column="layer")
    df["layer"] = canon_layer.to_numpy()
    df = _resolve_classes(df, rules, src)
    df["width"] = _class_value(df, rules, "width", "width")
    df["rise_time"] = _class_value(df, rules, "rise_time", "rise_time")
    df["gap"] = _class_value(df.assign(gap=np.where(df["pair"] != "", df["gap"], np.nan)), rules, "gap", "gap")
    df.loc[df["pair"] == "", "gap"] = np.nan
    df["driver_ohm"] = _class_value(df, rules, "driver_ohm", "driver_ohm")
    df["load_pf"] = _class_value(df, rules, "load_pf", "load_pf")
    for col, what in (("width", "a width (column 'width' or the net class's width)"),):
        miss = np.isnan(df[col].to_numpy(float))
        if miss.any():
            i = int(np.argmax(miss))
            raise InputError(f"net '{df['net'].iloc[i]}' has no width: give {what}", file=src,
                             row=int(df["row"].iloc[i]), column=col)
    pair_rows = (df["pair"] != "").to_numpy()
    miss_gap = pair_rows & np.isnan(df["gap"].to_numpy(float))
    if miss_gap.any():
        i = int(np.argmax(miss_gap))
        raise InputError(f"pair segment of '{df['net'].iloc[i]}' has no gap: give a 'gap' column or a class gap",
                         file=src, row=int(df["row"].iloc[i]), column="gap")
    _check_pairs(df, src)
    # rise time: fastest edge given on any of the net's rows (conservative)
    net_tr = df.groupby("net", sort=False)["rise_time"].min()
    missing_tr = net_tr[net_tr.isna()]
    if len(missing_tr):
        net = missing_tr.index[0]
        row = int(df.loc[df["net"] == net, "row"].iloc[0])
        raise InputError(f"net '{net}' has no rise time: give a 'rise_time' column (e.g. 350ps) or a net class "
                         "with rise_time in the rules", file=src, row=row, column="rise_time")

    # ---- the frequency each net works at: its class's freq, else the knee 0.5/Tr of its edge
    class_freq = {c.name: c.freq for c in rules.classes if c.freq}
    knee = 0.5 / df["net"].map(net_tr).to_numpy(float)
    df["freq"] = np.array([class_freq.get(c, k) for c, k in zip(df["net_class"], knee)], dtype=float)

    # ---- unique cross-sections, solved once each (per frequency only when a dielectric is dispersive)
    gap_key = df["gap"].fillna(-1.0)
    f_key = (df["freq"].map(lambda f: float(f"{f:.2g}")) if stackup.dispersive else pd.Series(0.0, index=df.index))
    keys = pd.MultiIndex.from_arrays([df["layer"], df["width"], gap_key, f_key])
    codes, uniques = pd.factorize(keys)
    xs = [stackup.cross_section(layer, float(w), None if g < 0 else float(g), freq=fk or None)
          for layer, w, g, fk in uniques]
    results = solver(xs)
    seg = _segment_table(df, codes, xs, results)
    _add_loss(seg, stackup, xs, results, codes, solver)
    from sicheck import crosstalk_review as xtr
    if couplings is not None:
        couplings = xtr.prepare_couplings(couplings, seg, stackup)
    xtalk = xtr.add_segment_crosstalk(seg, df, rules, stackup, solver, couplings)

    # ---- partners listed only through their pair: mirror their segments for the net table
    listed = set(df["net"])
    mirror = seg[(seg["pair"] != "") & ~seg["pair"].isin(listed)].copy()
    if len(mirror):
        mirror["net"], mirror["pair"] = mirror["pair"].to_numpy(), mirror["net"].to_numpy()
        mirror["mirrored"] = True
    all_seg = pd.concat([seg, mirror], ignore_index=True) if len(mirror) else seg
    nets = _net_table(all_seg, rules)
    waves: dict = {}
    if waveforms:
        from sicheck.waveform_review import simulate_nets
        nets, waves = simulate_nets(all_seg, nets, rules)
    if xtalk is not None and couplings is not None:
        xtr.attach_couplings(xtalk, couplings, seg, dict(zip(nets["net"], nets["rise_time"])))
    xtr.add_net_crosstalk(nets, all_seg, xtalk)
    findings = _findings(seg, nets, rules, xs, results, codes)
    findings += xtr.crosstalk_findings(xtalk, seg, rules, stackup, solver)
    findings.sort(key=lambda f: (SEVERITY_ORDER[f.severity], f.rule, f.net, f.layer))
    cs = [(uniques[i][0], xs[i], results[i]) for i in range(len(xs))]
    return Review(segments=seg, nets=nets, findings=findings, stackup=stackup, rules=rules,
                  traces_source=src, solver=solver_name, cross_sections=cs, waves=waves, crosstalk=xtalk)


def _add_loss(seg: pd.DataFrame, stackup: Stackup, xs, results, codes, solver: Solver) -> None:
    """Conductor and dielectric loss of each segment at its net's frequency (dB)."""
    from sicheck.physics.line_loss import Roughness, alphas, wheeler_derivative
    dzdn = wheeler_derivative(xs, solver)[codes]
    tand = np.array([r.signal_tand for r in results], dtype=float)[codes]
    a_c = np.zeros(len(seg))
    a_d = np.zeros(len(seg))
    for layer in pd.unique(seg["layer"]):
        m = (seg["layer"] == layer).to_numpy()
        lay = stackup.layer(layer)
        rough = Roughness(rms=lay.roughness, huray_radius=lay.huray_radius, huray_ratio=lay.huray_ratio)
        zs = np.where(seg["pair"].to_numpy()[m] != "", seg["zodd"].to_numpy()[m], seg["z0"].to_numpy()[m])
        c, d = alphas(seg["freq"].to_numpy()[m], zs, seg["eps_eff"].to_numpy()[m], tand[m], dzdn[m], rough)
        a_c[m], a_d[m] = c, d
    seg["conductor_loss_db_per_m"] = a_c
    seg["dielectric_loss_db_per_m"] = a_d
    seg["loss_db_per_m"] = a_c + a_d
    seg["loss_db"] = seg["loss_db_per_m"] * seg["length"]


def _segment_table(df: pd.DataFrame, codes: np.ndarray, xs, results) -> pd.DataFrame:
    def col(fn):
        return np.array([fn(r) for r in results], dtype=float)[codes]

    z0 = col(lambda r: r.z0)
    zs = col(lambda r: r.signal_z)
    es = col(lambda r: r.signal_eps)
    # closed-form single microstrips: eps_eff at the net's frequency (Kirschning & Jansen 1982); Z0 stays static
    disp = np.array([r.model.startswith("hammerstad") and not r.coupled for r in results])[codes]
    if disp.any():
        from sicheck.physics.cross_section import series_er
        from sicheck.physics.loss import kirschning_jansen_dispersion
        w = np.array([x.width for x in xs])[codes][disp]
        h = np.array([x.h_below for x in xs])[codes][disp]
        er = np.array([series_er(x.below) for x in xs])[codes][disp]
        covered = np.array([bool(x.above) for x in xs])[codes][disp]
        f = df["freq"].to_numpy(float)[disp]
        e_static = es[disp]
        # a cover raises eps_eff; disperse the bare part and keep the cover's increment
        e_disp = np.where(covered, e_static, kirschning_jansen_dispersion(f, w, h, er, e_static))
        es = es.copy()
        es[disp] = np.minimum(e_disp, er)
    l_pm, c_pm, d_pm = per_length(zs, es)
    seg = pd.DataFrame({
        "row": df["row"].to_numpy(),
        "net": df["net"].to_numpy(),
        "pair": df["pair"].to_numpy(),
        "layer": df["layer"].to_numpy(),
        "net_class": df["net_class"].to_numpy(),
        "kind": np.array([x.kind for x in xs], dtype=object)[codes],
        "length": df["length"].to_numpy(float),
        "width": df["width"].to_numpy(float),
        "gap": df["gap"].to_numpy(float),
        "z0": z0,
        "zdiff": col(lambda r: np.nan if r.zdiff is None else r.zdiff),
        "zodd": col(lambda r: np.nan if r.z_odd is None else r.z_odd),
        "zeven": col(lambda r: np.nan if r.z_even is None else r.z_even),
        "eps_eff": es,
        "delay_per_m": d_pm,
        "l_per_m": l_pm,
        "c_per_m": c_pm,
        "model": np.array([r.model for r in results], dtype=object)[codes],
        "uncertainty_pct": col(lambda r: np.nan if r.uncertainty_pct is None else r.uncertainty_pct),
        "formula_z": col(lambda r: np.nan if r.formula_z0 is None else r.formula_z0),
        "formula_zdiff": col(lambda r: np.nan if r.formula_zdiff is None else r.formula_zdiff),
        "rise_time": df["rise_time"].to_numpy(float),
        "driver_ohm": df["driver_ohm"].to_numpy(float),
        "load_pf": df["load_pf"].to_numpy(float),
        "freq": df["freq"].to_numpy(float),
        "xs": codes,
        "mirrored": False,
    })
    seg["delay"] = seg["length"] * seg["delay_per_m"]
    return seg


def _net_table(seg: pd.DataFrame, rules: Rules) -> pd.DataFrame:
    g = seg.groupby("net", sort=False)
    first = g.first()
    nets = pd.DataFrame({
        "net": first.index.to_numpy(),
        "net_class": first["net_class"].to_numpy(),
        "pair": first["pair"].to_numpy(),
        "segments": g.size().to_numpy(),
        "layers": g["layer"].agg(lambda s: " > ".join(dict.fromkeys(s))).to_numpy(),
        "length": g["length"].sum().to_numpy(),
        "delay": g["delay"].sum().to_numpy(),
        "loss_db": g["loss_db"].sum().to_numpy(),
        "freq": first["freq"].to_numpy(),
        "rise_time": g["rise_time"].min().to_numpy(),
        "driver_ohm": first["driver_ohm"].to_numpy(),
        "load_pf": first["load_pf"].to_numpy(),
        "z_driver_end": np.where(first["pair"] != "", first["zdiff"], first["z0"]),
        "zodd_driver_end": first["zodd"].to_numpy(),
        "mirrored": first["mirrored"].to_numpy(bool),
    })
    ratio = nets["delay"] / nets["rise_time"]
    el, term = electrical.classify(nets["delay"], nets["rise_time"], rules.lumped_max_td_over_tr,
                                   rules.required_min_td_over_tr)
    nets["td_over_tr"] = ratio
    nets["electrical"] = el
    nets["termination"] = term
    velocity = nets["length"] / nets["delay"]
    nets["knee_hz"] = electrical.knee_frequency(nets["rise_time"])
    nets["wavelength_at_knee"] = velocity / nets["knee_hz"]
    nets["lumped_limit_length"] = rules.lumped_max_td_over_tr * nets["rise_time"] * velocity
    nets["critical_length"] = rules.required_min_td_over_tr * nets["rise_time"] * velocity
    series, advice, short = [], [], []
    for r in nets.itertuples(index=False):
        needs = r.termination != electrical.NOT_NEEDED
        drv = None if np.isnan(r.driver_ohm) else float(r.driver_ohm)
        if r.pair:
            series.append(None)
            if needs:
                opts = termination.advise(float(r.zodd_driver_end), float(r.delay), drv,
                                          zdiff=float(r.z_driver_end))
                advice.append(opts[0].text)
                short.append(f"{opts[0].end_ohm:g} ohm differential")
            else:
                advice.append("")
                short.append("")
            continue
        rs = termination.series_value(float(r.z_driver_end), drv) if (needs and drv is not None) else None
        series.append(rs)
        if needs:
            opts = termination.advise(float(r.z_driver_end), float(r.delay), drv)
            advice.append("; or ".join(o.text for o in opts[:2]) if drv is None else opts[0].text +
                          "; alternatives: " + "; ".join(o.text for o in opts[1:]))
            short.append(f"{rs:g} ohm series" if rs is not None else
                         ("series Z0-Rdrv, or " if drv is None else "") + f"{opts[1].end_ohm:g} ohm at far end")
        else:
            advice.append("")
            short.append("")
    nets["series_ohm"] = series
    nets["advice"] = advice
    nets["proposal"] = short
    return nets


def _fmt_ps(seconds: float) -> str:
    return f"{seconds * 1e12:.0f} ps"


def _findings(seg: pd.DataFrame, nets: pd.DataFrame, rules: Rules, xs, results, codes) -> list[Finding]:
    sev = rules.severity
    out: list[Finding] = []

    def add(rule, net, layer, msg, row=None, severity=None):
        s = severity or sev[rule]
        if sev[rule] != "off":
            out.append(Finding(rule, s, net, layer, msg, row))

    classes = {c.name: c for c in rules.classes}
    cls_names = seg["net_class"].to_numpy()
    z0_t = np.array([getattr(classes.get(n), "z0", None) or np.nan for n in cls_names], dtype=float)
    zd_t = np.array([getattr(classes.get(n), "zdiff", None) or np.nan for n in cls_names], dtype=float)
    tol = np.array([rules.tolerance_for(classes.get(n)) for n in cls_names], dtype=float)
    is_pair = (seg["pair"] != "").to_numpy()
    with np.errstate(invalid="ignore"):
        err_se = (seg["z0"].to_numpy() - z0_t) / z0_t * 100.0
        err_df = (seg["zdiff"].to_numpy() - zd_t) / zd_t * 100.0
    miss_se = ~is_pair & (np.abs(err_se) > tol)
    miss_df = is_pair & (np.abs(err_df) > tol)
    seen_pairs: set = set()
    for i in np.nonzero(miss_se | miss_df)[0]:
        net, layer, row = seg["net"].iat[i], seg["layer"].iat[i], int(seg["row"].iat[i])
        cname = cls_names[i]
        if miss_df[i]:
            partner = seg["pair"].iat[i]
            key = (frozenset((net, partner)), layer, seg["width"].iat[i], seg["gap"].iat[i])
            if key in seen_pairs:          # the pair listed on both nets: report it once
                continue
            seen_pairs.add(key)
            add("zdiff-target", f"{net}/{partner}", layer,
                f"Zdiff {seg['zdiff'].iat[i]:.1f} ohm on {layer} (w {seg['width'].iat[i] * 1e3:.3f} mm, gap "
                f"{seg['gap'].iat[i] * 1e3:.3f} mm) misses the {cname} target {zd_t[i]:g} ohm "
                f"+/-{tol[i]:g} % by {err_df[i]:+.1f} %", row)
        else:
            add("z0-target", net, layer,
                f"Z0 {seg['z0'].iat[i]:.1f} ohm on {layer} (w {seg['width'].iat[i] * 1e3:.3f} mm) misses the "
                f"{cname} target {z0_t[i]:g} ohm +/-{tol[i]:g} % by {err_se[i]:+.1f} %", row)

    # fabrication minimum feature
    wmin = rules.min_feature
    narrow = (seg["width"].to_numpy() < wmin * (1 - 1e-9)) | (is_pair & (seg["gap"].to_numpy() < wmin * (1 - 1e-9)))
    for i in np.nonzero(narrow)[0]:
        what = "width" if seg["width"].iat[i] < wmin * (1 - 1e-9) else "gap"
        add("min-feature", seg["net"].iat[i], seg["layer"].iat[i],
            f"{what} {seg[what].iat[i] * 1e3:.3f} mm is below the minimum feature {wmin * 1e3:.3f} mm",
            int(seg["row"].iat[i]))

    # impedance steps along a net (layer changes)
    zsig = np.where(is_pair, seg["zdiff"], seg["z0"])
    tmp = pd.DataFrame({"net": seg["net"], "z": zsig, "layer": seg["layer"]})
    g = tmp.groupby("net", sort=False)["z"]
    stats = pd.DataFrame({"lo": g.min(), "hi": g.max(), "lo_at": g.idxmin(), "hi_at": g.idxmax()})
    stats = stats[(stats["hi"] - stats["lo"]) / stats["lo"] * 100.0 > rules.z_step_pct]
    for net, r in stats.iterrows():
        lo_l, hi_l = tmp["layer"].iat[int(r.lo_at)], tmp["layer"].iat[int(r.hi_at)]
        step = (r.hi - r.lo) / r.lo * 100.0
        add("z-step", net, f"{lo_l}/{hi_l}",
            f"impedance changes {step:.0f} % along the net ({r.lo:.1f} ohm on {lo_l} to {r.hi:.1f} ohm on "
            f"{hi_l}): each step reflects part of the edge")

    budget = {c.name: c.max_loss_db for c in rules.classes if c.max_loss_db is not None}
    seen_budget: set = set()
    for r in nets.itertuples(index=False):
        lim = budget.get(r.net_class)
        if lim is None or r.loss_db <= lim:
            continue
        key = frozenset((r.net, r.pair)) if r.pair else r.net
        if key in seen_budget:
            continue
        seen_budget.add(key)
        add("loss-budget", f"{r.net}/{r.pair}" if r.pair else r.net, r.layers,
            f"insertion loss {r.loss_db:.2f} dB at {r.freq * 1e-9:.3g} GHz over {r.length * 1e3:.0f} mm exceeds the "
            f"{r.net_class} budget of {lim:g} dB")

    done_pairs: set = set()
    untargeted: dict[str, list[str]] = {}
    for r in nets.sort_values("delay", ascending=False).itertuples(index=False):
        cls = classes.get(r.net_class)
        if r.termination == electrical.NOT_NEEDED:
            continue
        if r.pair:       # a pair is one finding, on its longer leg
            key = frozenset((r.net, r.pair))
            if key in done_pairs:
                continue
            done_pairs.add(key)
        label = f"{r.net}/{r.pair}" if r.pair else r.net
        msg = (f"one-way delay {_fmt_ps(r.delay)} is {r.td_over_tr:.2f} x the {_fmt_ps(r.rise_time)} rise time "
               f"(critical length {r.critical_length * 1e3:.1f} mm on its layers, net is {r.length * 1e3:.1f} mm): "
               f"transmission line, termination {r.termination}")
        simulated = isinstance(getattr(r, "termination_part", ""), str) and getattr(r, "termination_part", "")
        if simulated:
            msg += (f". Simulated: {r.termination_part} (overshoot {r.before_overshoot_pct:.0f} % -> "
                    f"{r.after_overshoot_pct:.0f} %, ringback {r.before_ringback_pct:.0f} % -> {r.after_ringback_pct:.0f} %, "
                    f"settled {r.before_settle_ns:.2f} -> {r.after_settle_ns:.2f} ns)")
            if r.waveform_assumptions:
                msg += f"; {r.waveform_assumptions}"
        elif r.advice:
            msg += f". Proposal: {r.advice}"
        add("electrical-length", label, r.layers, msg,
            severity=None if r.termination == electrical.REQUIRED else "info")
        if simulated and r.waveform_meets_limits is False:
            add("waveform", label, r.layers, f"no standard termination meets the limits; best found: "
                                             f"{r.termination_part} ({r.waveform_violations})")
        if cls is None or (cls.z0 is None and cls.zdiff is None):
            untargeted.setdefault(r.net_class or "none", []).append(label)
    if "termination_part" in nets.columns:
        flagged = nets[nets["termination"] != electrical.NOT_NEEDED]
        unsimulated = int((flagged["termination_part"] == "").sum())
        if unsimulated:
            add("waveform", f"{unsimulated} nets", "", f"the waveform check ran on the {rules.max_nets} longest of "
                f"{len(flagged)} nets that need termination; the others keep the first-order advice "
                "(raise [waveform] max_nets to simulate them all)", severity="info")
    for cname, labels in untargeted.items():
        shown = ", ".join(labels[:5]) + (f" and {len(labels) - 5} more" if len(labels) > 5 else "")
        add("no-target", shown, "", f"{len(labels)} transmission-line net(s) in class '{cname}' have no "
                                    f"impedance target: set z0 or zdiff for the class")

    for i, (x, res) in enumerate(zip(xs, results)):
        field_solved = res.model.startswith("field")
        notes = list(res.warnings)
        diff = None
        if field_solved:
            z_f, z_ref = (res.formula_zdiff, res.zdiff) if x.coupled else (res.formula_z0, res.z0)
            if z_f is not None and z_ref:
                diff = (z_f - z_ref) / z_ref * 100.0
        if not notes and (diff is None or abs(diff) <= rules.formula_field_pct):
            continue
        rows = seg.index[seg["xs"] == i]
        nets_here = seg.loc[rows, "net"].unique()
        label = ", ".join(nets_here[:3]) + (f" and {len(nets_here) - 3} more" if len(nets_here) > 3 else "")
        layer = seg.loc[rows[0], "layer"]
        for w in notes:
            add("model-accuracy", label, layer, f"{res.model}: {w}")
        if diff is not None and abs(diff) > rules.formula_field_pct:
            what = "Zdiff" if x.coupled else "Z0"
            z_ref = res.zdiff if x.coupled else res.z0
            z_f = res.formula_zdiff if x.coupled else res.formula_z0
            why = "; ".join(res.formula_warnings) or "closed-form approximation"
            add("formula-vs-field", label, layer,
                f"{what}: field solution {z_ref:.1f} ohm (+/-{res.uncertainty_pct:.2f} %) vs closed form "
                f"{z_f:.1f} ohm ({diff:+.1f} %); the field value is reported ({why})")
    return out
