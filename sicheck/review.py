"""The review: trace list + stackup + rules -> segments, nets and findings.

Pure orchestration over tables; no printing, no files. Each unique cross-section
(layer, width, gap) is solved once and mapped back to its segments.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import cached_property
from operator import attrgetter
from typing import Callable

import numpy as np
import pandas as pd

from sicheck.checks import ReviewContext, run_checks, run_early
from sicheck.checks.fabrication_band import tolerances as fab_tolerances
from sicheck.errors import InputError
from sicheck.findings import SEVERITY_ORDER, Finding
from sicheck.physics import electrical, termination
from sicheck.physics.cross_section import CrossSection
from sicheck.physics.fab_band import band_columns, tolerance_band
from sicheck.physics.formula import solve_formula
from sicheck.physics.line_result import LineResult, per_length
from sicheck.rules import Rules
from sicheck.skew import check_group_column
from sicheck.stackup import Stackup
from sicheck.traces import TraceList
from sicheck.via_table import net_via_summary, via_delay_per_row, via_table

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
    signoff: object = None      # sicheck.signoff.SignOff when a previous review or waivers were given

    @property
    def counts(self) -> dict[str, int]:
        c = {"error": 0, "warning": 0, "info": 0}
        for f in self.findings:
            c[f.severity] += 1
        return c

    @cached_property
    def net_counts(self) -> dict[str, int]:
        """Headline counts by termination and electrical class, a pair counted once (by its longer leg)."""
        n = self.nets[["net", "pair", "delay", "termination", "electrical"]]      # not the whole table twice
        order = n.sort_values("delay", ascending=False, kind="stable")
        seen: set = set()
        once = []
        for idx, net, pair in zip(order.index.tolist(), order["net"].tolist(), order["pair"].tolist()):
            ident = frozenset((net, pair)) if pair else net
            if ident not in seen:
                once.append(idx)
                seen.add(ident)
        u = n.loc[sorted(once)]
        out = {k: int((u["termination"] == k).sum()) for k in ("not-needed", "recommended", "required")}
        out.update({k: int((u["electrical"] == k).sum()) for k in ("lumped", "transmission-line")})
        out["nets"] = int(len(u))
        return out

    @property
    def exit_code(self) -> int:
        """1 when an error finding is not waived (a waived finding keeps its severity but passes)."""
        waived = self.signoff.waived_keys if self.signoff is not None else set()
        return 1 if any(f.severity == "error" and (f.key or f"{f.rule}|{f.net}") not in waived
                        for f in self.findings) else 0


def _resolve_classes(df: pd.DataFrame, rules: Rules, src: str) -> pd.DataFrame:
    names = []
    cache: dict[tuple[str, str], str] = {}
    by_pattern = any(c.match for c in rules.classes)    # else a net's name cannot change its class
    for net, explicit, row in zip(*(df[c].to_numpy(object).tolist() for c in ("net", "net_class", "row"))):
        key = (net if by_pattern and not explicit else "", explicit)
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
        codes, names = pd.factorize(df["net_class"].to_numpy(object), use_na_sentinel=False)   # a lookup per class
        fill = np.array([np.nan if by_class.get(n) is None else by_class.get(n) for n in names], dtype=float)[codes]
        vals[missing] = fill[missing]
    return vals


def _check_pairs(df: pd.DataFrame, src: str) -> None:
    net, partner = df["net"].to_numpy(object), df["pair"].to_numpy(object)
    for i in np.flatnonzero(partner == net).tolist():      # the first row whose partner is itself
        if partner[i]:
            raise InputError(f"net '{net[i]}' is paired with itself", file=src, row=int(df["row"].iloc[i]),
                             column="pair")
    nets = set(net.tolist())
    # A partner that lists its own rows must name this net back.
    back = df[df["pair"] != ""].groupby("net")["pair"].first().to_dict()
    for net, partner in back.items():
        if partner in nets and partner in back and back[partner] != net:
            row = int(df.loc[df["net"] == net, "row"].iloc[0])
            raise InputError(f"net '{net}' pairs with '{partner}', but '{partner}' pairs with '{back[partner]}'",
                             file=src, row=row, column="pair")


def build_review(traces: TraceList, stackup: Stackup, rules: Rules, solver: Solver = solve_formula,
                 solver_name: str = "formula", waveforms: bool = True,
                 couplings: pd.DataFrame | None = None, band: bool = True) -> Review:
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
    df = check_group_column(df, rules.match_groups, src)
    from sicheck.series_parts import join        # nets continuing through a series part: one net each
    df = join(df, src, rules.series_parts)
    df["width"] = _class_value(df, rules, "width", "width")
    df["rise_time"] = _class_value(df, rules, "rise_time", "rise_time")
    df["gap"] = _class_value(df.assign(gap=np.where(df["pair"] != "", df["gap"], np.nan)), rules, "gap", "gap")
    df.loc[df["pair"] == "", "gap"] = np.nan
    given = {c: df[c].notna().to_numpy() for c in ("driver_ohm", "load_pf", "rise_time")}   # for the waveform notes
    df["driver_ohm"] = _class_value(df, rules, "driver_ohm", "driver_ohm")
    df["load_pf"] = df["load_pf"] * 1e12     # the reader gives farads; classes, rules and this column use pF
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
    net_tr = df.groupby("net", sort=False)["rise_time"].transform("min").to_numpy(float)     # on each row
    missing_tr = np.isnan(net_tr)
    if missing_tr.any():        # the first net without one: its first row
        i = int(np.argmax(missing_tr))
        raise InputError(f"net '{df['net'].iloc[i]}' has no rise time: give a 'rise_time' column (e.g. 350ps) or a "
                         "net class with rise_time in the rules", file=src, row=int(df["row"].iloc[i]),
                         column="rise_time")

    # ---- the frequency each net works at: its class's freq, else the knee 0.5/Tr of its edge
    class_freq = {c.name: c.freq for c in rules.classes if c.freq}
    knee = 0.5 / net_tr
    codes, names = pd.factorize(df["net_class"].to_numpy(object), use_na_sentinel=False)     # a lookup per class
    of_class = np.array([class_freq.get(n, np.nan) for n in names], dtype=float)[codes]
    df["freq"] = np.where(np.array([n in class_freq for n in names], dtype=bool)[codes], of_class, knee)

    # ---- unique cross-sections, solved once each (per frequency only when a dielectric is dispersive)
    gap_key = df["gap"].fillna(-1.0)
    if stackup.dispersive:      # each distinct frequency rounded once: a board has a few edges and class freqs
        f_uniq, f_at = np.unique(df["freq"].to_numpy(float), return_inverse=True)
        f_key = pd.Series(np.array([float(f"{f:.2g}") for f in f_uniq.tolist()], dtype=float)[f_at.ravel()],
                          index=df.index, name="freq")
    else:
        f_key = pd.Series(0.0, index=df.index)
    keys = pd.MultiIndex.from_arrays([df["layer"], df["width"], gap_key, f_key])
    codes, uniques = pd.factorize(keys)
    xs = [stackup.cross_section(layer, float(w), None if g < 0 else float(g), freq=fk or None)
          for layer, w, g, fk in uniques]
    results = solver(xs)
    seg = _segment_table(df, codes, xs, results)
    # fabrication band: each cross-section re-solved at its tolerance limits (sicheck.physics.fab_band)
    if band:          # off (review --no-band): no band columns, so tolerance-band has nothing to check
        b = tolerance_band(xs, results, solver, fab_tolerances(rules), ratio_solve=getattr(solver, "band_ratios", None))
        for name, values in band_columns(b).items():
            seg[name] = values[codes]
    seg["vias"] = df["vias"].to_numpy(float) if "vias" in df else 0.0
    _add_loss(seg, stackup, xs, results, codes, solver)
    for c, m in given.items():
        seg[f"{c}_given"] = m
    from sicheck import crosstalk_review as xtr     # before the mirroring: partners inherit the columns
    if couplings is not None:
        couplings = xtr.prepare_couplings(couplings, seg, stackup)
    xtalk = xtr.add_segment_crosstalk(seg, df, rules, stackup, solver, couplings)
    topology = _topology(df, seg, rules, src)

    # ---- partners listed only through their pair: mirror their segments for the net table
    listed = set(df["net"].to_numpy(object).tolist())
    mirror = seg[(seg["pair"] != "") & ~seg["pair"].isin(listed)].copy()
    if len(mirror):
        mirror["net"], mirror["pair"] = mirror["pair"].to_numpy(), mirror["net"].to_numpy()
        mirror["mirrored"] = True
    all_seg = pd.concat([seg, mirror], ignore_index=True) if len(mirror) else seg
    vias = _add_vias(all_seg, seg, stackup, topology)
    nets = _net_table(all_seg, rules, advise=False)     # the advice columns: worked out meanwhile (below)
    from sicheck.on_die import on_die_column
    nets["on_die"] = on_die_column(nets, rules)     # and their advice says so (on_die.mark_nets, meanwhile)
    nets["vias"], nets["via_stub_resonance"] = net_via_summary(nets, vias)
    # a partner listed only through its pair has its leg's shape
    for partner, leg in zip(mirror["net"].to_numpy(object).tolist(), mirror["pair"].to_numpy(object).tolist()):
        if leg in topology:
            topology.setdefault(partner, topology[leg])
    from sicheck.topology import CHAIN_NOTE
    net_names = nets["net"].to_numpy(object).tolist()
    nets["topology_note"] = [topology[n].note if n in topology else (CHAIN_NOTE if k > 1 else "")
                             for n, k in zip(net_names, nets["segments"].to_numpy().tolist())]
    nets["topology"] = [_topology_summary(topology[n]) if n in topology else None for n in net_names]
    early: dict = {}
    prepared: dict = {}
    crosstalk_cols: dict = {}
    advice_cols: dict = {}

    def meanwhile():
        """What needs no waveform: the first-order advice, the crosstalk figures and the checks that do not read
        the waveform stage's columns, worked out while its processes run (the second core is otherwise idle)."""
        advice_cols.update(_advice_columns(nets, rules))
        if xtalk is not None and couplings is not None:
            xtr.attach_couplings(xtalk, couplings, seg, dict(zip(nets["net"], nets["rise_time"])))
        figures = pd.DataFrame({"net": nets["net"].to_numpy(object)})
        xtr.add_net_crosstalk(figures, all_seg, xtalk)
        crosstalk_cols.update({c: figures[c].to_numpy() for c in figures.columns if c != "net"})
        before = nets.copy()
        for c, values in [*advice_cols.items(), *crosstalk_cols.items()]:
            before[c] = values
        if waveforms:
            xtr.add_waves(xtalk, seg, rules)
        ctx = ReviewContext(segments=seg, nets=before, rules=rules, stackup=stackup,
                            cross_sections=list(zip(xs, results)), topology=topology, crosstalk=xtalk, vias=vias)
        early.update(run_early(ctx))
        prepared.update(ctx.prepared)       # the waveform checks' share that needs no waveform

    waves: dict = {}
    if waveforms:
        from sicheck.waveform_review import simulate_nets
        nets, waves = simulate_nets(all_seg, nets, rules, xs, topology, meanwhile=meanwhile)
    if not advice_cols:     # no waveform stage (or it had nothing to hand out meanwhile)
        meanwhile()
    for c, values in advice_cols.items():         # in their placeholders' places
        nets[c] = values
    for c, values in crosstalk_cols.items():      # after the waveform columns, as they always were
        nets[c] = values
    ctx = ReviewContext(segments=seg, nets=nets, rules=rules, stackup=stackup,
                        cross_sections=list(zip(xs, results)), topology=topology, crosstalk=xtalk,
                        vias=vias, prepared=prepared)
    findings = _by_severity_rule_net(run_checks(ctx, ready=early))
    cs = [(uniques[i][0], xs[i], results[i]) for i in range(len(xs))]
    return Review(segments=seg, nets=nets, findings=findings, stackup=stackup, rules=rules,
                  traces_source=src, solver=solver_name, cross_sections=cs, waves=waves, crosstalk=xtalk)


def _by_severity_rule_net(findings: list[Finding]) -> list[Finding]:
    """Sorted by (severity in SEVERITY_ORDER, rule, net, layer), equal ones in their order: each severity's
    findings apart, each sorted by a key made in C (a large board has ~100 000 findings)."""
    apart: dict[str, list[Finding]] = {s: [] for s in SEVERITY_ORDER}
    for f in findings:
        apart[f.severity].append(f)
    by = attrgetter("rule", "net", "layer")
    return [f for s in sorted(apart, key=SEVERITY_ORDER.get) for f in sorted(apart[s], key=by)]


def _add_vias(all_seg: pd.DataFrame, seg: pd.DataFrame, stackup: Stackup, topology: dict) -> pd.DataFrame:
    """The board's vias; each segment gains `via_delay`, the barrel delay of the vias entered on its row."""
    # a partner listed only through its pair has its leg's shape
    m = all_seg["mirrored"].to_numpy(bool)
    legs = dict(zip(all_seg["net"].to_numpy(object)[m].tolist(), all_seg["pair"].to_numpy(object)[m].tolist()))
    shapes = {**{p: topology[leg] for p, leg in legs.items() if leg in topology}, **topology}
    vias = via_table(all_seg, stackup, shapes)
    all_seg["via_delay"] = via_delay_per_row(all_seg, vias)
    if all_seg is not seg:
        seg["via_delay"] = all_seg["via_delay"].to_numpy()[:len(seg)]
    return vias


def _topology(df: pd.DataFrame, seg: pd.DataFrame, rules: Rules, src: str) -> dict:
    """Each net's tree where its rows name nodes (sicheck/topology.py): {net: Topology}.

    Marks the segments on the net's main path (`on_path`) and the one whose impedance the driver sees
    (`driver_end`): the first on the path, from the driver, whose delay reaches the class's
    `ignore_shorter_than_tr` x Tr (a shorter neck-down or pad entry is lumped), else the first. A net
    without nodes is its rows in series, driver first.
    """
    from sicheck import topology
    net = seg["net"]
    cols = {c: (df[c].to_numpy(object) if c in df.columns else np.full(len(df), "", dtype=object))
            for c in ("from", "to", "driver")}
    tops = {}
    if any(any(v) for v in cols.values()):
        by_class = {c.name: c.driver for c in rules.classes if c.driver}
        pats = {n: (c, by_class[c]) for n, c in zip(net, seg["net_class"]) if c in by_class}
        tops = topology.net_topologies(net.to_numpy(object), seg["row"].to_numpy(), cols["from"], cols["to"],
                                       cols["driver"], seg["length"].to_numpy(float), seg["delay"].to_numpy(float),
                                       seg["load_pf_given"].to_numpy(bool), src, pats)
        from sicheck.series_parts import check_part_side
        check_part_side(tops, seg, cols["to"], src)
    on = np.ones(len(seg), bool)
    step = np.arange(len(seg))                 # position along the main path (listed order for a chain)
    for ix, t in tops.values():
        ix = np.asarray(ix)
        on[ix] = False
        on[ix[list(t.path)]] = True
        step[ix[list(t.path)]] = ix[0] + np.arange(len(t.path))
    classes = {c.name: c for c in rules.classes}
    cls_at, cls_names = pd.factorize(seg["net_class"].to_numpy(object))        # a lookup per class
    frac = np.array([rules.value("ignore_shorter_than_tr", classes.get(c)) for c in cls_names.tolist()],
                    dtype=float)[cls_at]
    tr = seg.groupby("net", sort=False)["rise_time"].transform("min").to_numpy(float)
    long_enough = on & (seg["delay"].to_numpy(float) >= frac * tr)
    order = pd.DataFrame({"net": net, "step": np.where(on, step, len(seg)), "rank": ~long_enough})
    first = order.sort_values(["rank", "step"], kind="stable").groupby("net", sort=False).head(1).index
    de = np.zeros(len(seg), bool)
    de[first] = True
    seg["on_path"], seg["driver_end"] = on, de
    return {n: t for n, (_, t) in tops.items()}


def _topology_summary(t) -> dict:
    """A net's tree for reports (lengths in m, delays in s)."""
    return {"driver": t.driver, "driver_source": t.driver_source, "receivers": list(t.receivers),
            "receiver_length": list(t.receiver_length), "receiver_delay": list(t.receiver_delay),
            "open_ends": list(t.open_ends),
            "stubs": [{"node": s.node, "end": s.end, "length": s.length, "delay": s.delay} for s in t.stubs]}


def _add_loss(seg: pd.DataFrame, stackup: Stackup, xs, results, codes, solver: Solver) -> None:
    """Conductor and dielectric loss of each segment at its net's frequency (dB)."""
    from sicheck.physics.line_loss import Roughness, alphas, loss_uncertainty_pct, wheeler_derivative
    dzdn = wheeler_derivative(xs, solver, results)[codes]
    tand = np.array([r.signal_tand for r in results], dtype=float)[codes]
    a_c = np.zeros(len(seg))
    a_d = np.zeros(len(seg))
    # the columns and each row's layer (as a code) read once, not once per layer
    at, layers = pd.factorize(seg["layer"].to_numpy(object))
    z = np.where(seg["pair"].to_numpy(object) != "", seg["zodd"].to_numpy(float), seg["z0"].to_numpy(float))
    freq, eps = seg["freq"].to_numpy(float), seg["eps_eff"].to_numpy(float)
    for k, layer in enumerate(layers.tolist()):
        m = at == k
        lay = stackup.layer(layer)
        rough = Roughness(rms=lay.roughness, huray_radius=lay.huray_radius, huray_ratio=lay.huray_ratio)
        c, d = alphas(freq[m], z[m], eps[m], tand[m], dzdn[m], rough)
        a_c[m], a_d[m] = c, d
    seg["conductor_loss_db_per_m"] = a_c
    seg["dielectric_loss_db_per_m"] = a_d
    seg["loss_db_per_m"] = a_c + a_d
    u_c = np.array([np.nan if r.loss_uncertainty_pct is None else r.loss_uncertainty_pct for r in results])[codes]
    seg["loss_uncertainty_pct"] = loss_uncertainty_pct(a_c, a_d, u_c, seg["uncertainty_pct"].to_numpy(float))
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
        "match_group": df["match_group"].to_numpy() if "match_group" in df.columns else "",
        "routed_net": df["routed_net"].to_numpy() if "routed_net" in df.columns else df["net"].to_numpy(),
        "part_ohm": df["part_ohm"].to_numpy(float) if "part_ohm" in df.columns else np.nan,
        "part_farad": df["part_farad"].to_numpy(float) if "part_farad" in df.columns else np.nan,
    })
    seg["delay"] = seg["length"] * seg["delay_per_m"]
    return seg


def _layer_paths(seg: pd.DataFrame, nets: pd.Index) -> np.ndarray:
    """Each net's layers in the order its segments visit them ("TOP > IN3")."""
    # each (net, layer) once, first rows first: the pair as one integer of the two codes, not two texts
    net_at, _ = pd.factorize(seg["net"].to_numpy(object))
    layer_at, layers = pd.factorize(seg["layer"].to_numpy(object))
    first = np.sort(np.unique(net_at.astype(np.int64) * len(layers) + layer_at, return_index=True)[1])
    paths: dict[str, str] = {}
    for net, layer in zip(seg["net"].to_numpy(object)[first].tolist(), seg["layer"].to_numpy(object)[first].tolist()):
        p = paths.get(net)
        paths[net] = layer if p is None else f"{p} > {layer}"
    return np.array([paths[n] for n in nets.to_numpy(object).tolist()], dtype=object)


def _net_table(seg: pd.DataFrame, rules: Rules, advise: bool = True) -> pd.DataFrame:
    g = seg.groupby("net", sort=False)
    first = g[["net_class", "pair", "freq", "driver_ohm", "load_pf", "mirrored", "zdiff", "z0", "zodd"]].first()
    # length, delay and loss along the main path (driver to the farthest receiver); all rows when not marked
    on = seg["on_path"].to_numpy(bool) if "on_path" in seg.columns else np.ones(len(seg), bool)
    gp = pd.DataFrame({"net": seg["net"], **{c: np.where(on, seg[c].to_numpy(float), 0.0)
                                             for c in ("length", "delay", "loss_db", "via_delay")
                                             if c in seg.columns}}).groupby("net", sort=False)
    if "driver_end" in seg.columns:      # the driver-end segment's impedance, not the first row's
        de = (seg.loc[seg["driver_end"].to_numpy(bool), ["net", "zdiff", "z0", "zodd"]].groupby("net", sort=False)
              .first().reindex(first.index))
        first = first.assign(zdiff=de["zdiff"], z0=de["z0"], zodd=de["zodd"])
    nets = pd.DataFrame({
        "net": first.index.to_numpy(),
        "net_class": first["net_class"].to_numpy(),
        "pair": first["pair"].to_numpy(),
        "segments": g.size().to_numpy(),
        "layers": _layer_paths(seg, first.index),
        "length": gp["length"].sum().to_numpy(),
        "copper_length": g["length"].sum().to_numpy(),
        # vias' barrel delay (review._add_vias) belongs to the net's delay
        "delay": (gp["delay"].sum() + (gp["via_delay"].sum() if "via_delay" in seg else 0.0)).to_numpy(),
        "loss_db": gp["loss_db"].sum().to_numpy(),
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
    # the first-order advice; when not `advise`, placeholders that the caller fills in (_advice_columns)
    series, advice, short = _advice(nets) if advise else ([None] * len(nets), [""] * len(nets), [""] * len(nets))
    nets["series_ohm"] = series
    nets["advice"] = advice
    nets["proposal"] = short
    return nets


def _advice(nets: pd.DataFrame) -> tuple[list, list, list]:
    """Series value, advice and proposal per net (columns series_ohm, advice, proposal)."""
    # a net that needs no termination gets no series value, advice or proposal: only the others are visited
    n = len(nets)
    series, advice, short = [None] * n, [""] * n, [""] * n
    needs = (nets["termination"] != electrical.NOT_NEEDED).to_numpy()
    todo = np.nonzero(needs)[0]
    from sicheck.checks.engine import plain_rows
    for i, r in zip(todo.tolist(), plain_rows(nets.iloc[todo][["pair", "driver_ohm", "delay", "z_driver_end",
                                                                "zodd_driver_end"]])):
        drv = None if np.isnan(r.driver_ohm) else float(r.driver_ohm)
        if r.pair:
            opts = termination.advise(float(r.zodd_driver_end), float(r.delay), drv, zdiff=float(r.z_driver_end))
            advice[i] = opts[0].text
            short[i] = f"{opts[0].end_ohm:g} ohm differential"
            continue
        rs = termination.series_value(float(r.z_driver_end), drv) if drv is not None else None
        series[i] = rs
        opts = termination.advise(float(r.z_driver_end), float(r.delay), drv)
        advice[i] = ("; or ".join(o.text for o in opts[:2]) if drv is None else opts[0].text +
                     "; alternatives: " + "; ".join(o.text for o in opts[1:]))
        short[i] = (f"{rs:g} ohm series" if rs is not None else
                    ("series Z0-Rdrv, or " if drv is None else "") + f"{opts[1].end_ohm:g} ohm at far end")
    return series, advice, short


def _advice_columns(nets: pd.DataFrame, rules: Rules) -> dict[str, pd.Series]:
    """The columns series_ohm, advice and proposal as _net_table(..., advise=True) and then on_die.mark_nets
    leave them: the same lists through the same steps."""
    from sicheck.on_die import mark_nets
    t = nets[["net_class", "pair", "termination"]].copy()
    t["series_ohm"], t["advice"], t["proposal"] = _advice(nets)
    t = mark_nets(t, rules)
    return {c: t[c] for c in ("series_ohm", "advice", "proposal")}
