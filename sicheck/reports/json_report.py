"""The review as JSON (keys are a public interface: other tools read them)."""

from __future__ import annotations

import json
import math

import numpy as np

from sicheck import __version__
from sicheck.review import Review


def _num(x, digits=6):
    if x is None:
        return None
    try:
        v = float(x)
    except (TypeError, ValueError):
        return None
    if not math.isfinite(v):
        return None
    if v == 0:
        return 0.0
    return float(f"{v:.{digits}g}")


def _col(df, name, scale=1.0, digits=6):
    a = df[name].to_numpy(float) * scale
    return [_num(v, digits) for v in a]


def segments_json(seg) -> list[dict]:
    cols = {
        "length_mm": _col(seg, "length", 1e3), "width_mm": _col(seg, "width", 1e3),
        "gap_mm": _col(seg, "gap", 1e3),
        "z0_ohm": _col(seg, "z0"), "zdiff_ohm": _col(seg, "zdiff"), "zodd_ohm": _col(seg, "zodd"),
        "zeven_ohm": _col(seg, "zeven"), "eps_eff": _col(seg, "eps_eff"),
        "delay_ps": _col(seg, "delay", 1e12), "delay_ps_per_mm": _col(seg, "delay_per_m", 1e9),
        "l_nh_per_mm": _col(seg, "l_per_m", 1e6), "c_pf_per_mm": _col(seg, "c_per_m", 1e9),
        "uncertainty_pct": _col(seg, "uncertainty_pct"), "formula_z_ohm": _col(seg, "formula_z"),
        "formula_zdiff_ohm": _col(seg, "formula_zdiff"),
        "conductor_loss_db_per_mm": _col(seg, "conductor_loss_db_per_m", 1e-3),
        "dielectric_loss_db_per_mm": _col(seg, "dielectric_loss_db_per_m", 1e-3),
        "loss_db_per_mm": _col(seg, "loss_db_per_m", 1e-3), "loss_db": _col(seg, "loss_db"),
        "freq_ghz": _col(seg, "freq", 1e-9),
    }
    net, layer, pair, kind, model, row = (seg[c].tolist() for c in ("net", "layer", "pair", "kind", "model", "row"))
    xt = ((_col(seg, "spacing", 1e3), _col(seg, "parallel", 1e3), _col(seg, "next_pct", 1, 4), _col(seg, "fext_pct", 1, 4))
          if "next_pct" in seg else None)
    out = []
    for i in range(len(seg)):
        d = {"row": int(row[i]), "net": net[i], "layer": layer[i], "kind": kind[i],
             "length_mm": cols["length_mm"][i], "width_mm": cols["width_mm"][i],
             "z0_ohm": cols["z0_ohm"][i], "eps_eff": cols["eps_eff"][i], "delay_ps": cols["delay_ps"][i],
             "delay_ps_per_mm": cols["delay_ps_per_mm"][i], "l_nh_per_mm": cols["l_nh_per_mm"][i],
             "c_pf_per_mm": cols["c_pf_per_mm"][i], "model": model[i],
             "solver": "field" if model[i].startswith("field") else "formula",
             "uncertainty_pct": cols["uncertainty_pct"][i], "freq_ghz": cols["freq_ghz"][i],
             "conductor_loss_db_per_mm": cols["conductor_loss_db_per_mm"][i],
             "dielectric_loss_db_per_mm": cols["dielectric_loss_db_per_mm"][i],
             "loss_db_per_mm": cols["loss_db_per_mm"][i], "loss_db": cols["loss_db"][i]}
        if pair[i]:
            d.update(pair=pair[i], gap_mm=cols["gap_mm"][i], zdiff_ohm=cols["zdiff_ohm"][i],
                     zodd_ohm=cols["zodd_ohm"][i], zeven_ohm=cols["zeven_ohm"][i])
            if cols["formula_zdiff_ohm"][i] is not None:
                d["formula_zdiff_ohm"] = cols["formula_zdiff_ohm"][i]
        if cols["formula_z_ohm"][i] is not None:
            d["formula_z0_ohm"] = cols["formula_z_ohm"][i]
        if xt is not None:
            d.update(spacing_mm=xt[0][i], parallel_mm=xt[1][i], next_pct=xt[2][i], fext_pct=xt[3][i])
        out.append(d)
    return out


def nets_json(nets) -> list[dict]:
    out = []
    for r in nets.itertuples(index=False):
        out.append({
            "net": r.net, "net_class": r.net_class or None, "pair": r.pair or None, "segments": int(r.segments),
            "layers": r.layers, "length_mm": _num(r.length * 1e3), "delay_ps": _num(r.delay * 1e12),
            "rise_time_ps": _num(r.rise_time * 1e12), "td_over_tr": _num(r.td_over_tr, 4),
            "freq_ghz": _num(r.freq * 1e-9, 4), "loss_db": _num(r.loss_db, 4),
            "knee_ghz": _num(r.knee_hz * 1e-9, 4), "wavelength_at_knee_mm": _num(r.wavelength_at_knee * 1e3),
            "lumped_limit_mm": _num(r.lumped_limit_length * 1e3), "critical_length_mm": _num(r.critical_length * 1e3),
            "electrical": r.electrical, "termination": r.termination,
            "series_ohm": None if r.series_ohm is None or (isinstance(r.series_ohm, float) and np.isnan(r.series_ohm))
            else _num(r.series_ohm),
            "z_driver_end_ohm": _num(r.z_driver_end), "advice": r.advice or None,
            "listed_via_partner": bool(r.mirrored),
        })
        d = out[-1]
        if hasattr(r, "next_pct"):
            d["next_pct"], d["fext_pct"] = _num(r.next_pct, 4), _num(r.fext_pct, 4)
        part = getattr(r, "termination_part", "")
        if isinstance(part, str) and part:
            d["recommended_termination"] = part
            d["termination_scheme"] = r.recommended_termination
            d["overshoot_pct"] = _num(r.after_overshoot_pct, 4)
            d["settle_ns"] = _num(r.after_settle_ns, 4)
            d["before"] = {k: _num(getattr(r, f"before_{k}"), 4) for k in WAVE_KEYS}
            d["after"] = {k: _num(getattr(r, f"after_{k}"), 4) for k in WAVE_KEYS}
            d["meets_limits"] = bool(r.waveform_meets_limits)
            d["termination_power_mw"] = _num(r.termination_power_w * 1e3, 4)
            if r.waveform_assumptions:
                d["assumptions"] = r.waveform_assumptions
        else:
            d["recommended_termination"] = None
    return out


WAVE_KEYS = ("overshoot_pct", "ringback_pct", "settle_ns", "flight_ns")


def review_dict(rv: Review) -> dict:
    nets = rv.nets
    summary = {
        "tool": "sicheck", "version": __version__, "traces": rv.traces_source, "stackup": rv.stackup.source,
        "stackup_name": rv.stackup.name, "rules": list(rv.rules.sources), "solver": rv.solver,
        "segments": int(len(rv.segments)), "nets": int(len(nets)),
        "cross_sections": len(rv.cross_sections),
        "findings": rv.counts,
        "termination": {k: int((nets["termination"] == k).sum()) for k in ("not-needed", "recommended", "required")},
        "electrical": {k: int((nets["electrical"] == k).sum()) for k in ("lumped", "transmission-line")},
        "exit_code": rv.exit_code,
    }
    out = {"summary": summary, "nets": nets_json(nets), "segments": segments_json(rv.segments),
           "findings": [f.as_dict() for f in rv.findings]}
    if getattr(rv, "crosstalk", None) is not None:
        from sicheck.reports.crosstalk_report import crosstalk_json
        out["crosstalk"] = crosstalk_json(rv.crosstalk)
    return out


def review_json(rv: Review) -> str:
    return json.dumps(review_dict(rv), ensure_ascii=False, allow_nan=False, separators=(",", ":"))
