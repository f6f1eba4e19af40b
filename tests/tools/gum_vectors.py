#!/usr/bin/env python3
"""Generate GUM first-order uncertainty vectors for the monitor's figures.

Source of every uncertainty written here: the GUM first-order law of
propagation (JCGM 100:2008 §5.1.2) as implemented by the PyPI package
`uncertainties` (linear error propagation with exact derivatives), applied to
the definitions of DESIGN.md §4. Nothing here uses heatbound's own partials.

Model: each channel's standard uncertainty is a *systematic* error shared by
every sample (DESIGN.md §4, "Uncertainty"), so it is one `ufloat` applied to
the whole integrand:

    T_hot[i]  -> T_hot[i]  + d_hot,   d_hot  = ufloat(0, u_hot_k)
    T_cold[i] -> T_cold[i] + d_cold,  d_cold = ufloat(0, u_cold_k)
    q_in[i]   -> q_in[i]  * s_in,     s_in   = ufloat(1, u_heat_in_rel)
    w[i]      -> w[i]     * s_w,      s_w    = ufloat(1, u_work_rel)
    q_out[i]  -> q_out[i] * s_out,    s_out  = ufloat(1, u_heat_out_rel)   (measured)
    q_out[i]  =  q_in[i] * s_in - w[i] * s_w                               (inferred)

The integrals are then taken by the trapezoid rule with these ufloats, and
eta, eta_C, margin, S_gen and sigma-dot follow from DESIGN.md §4. When heat
out is measured and no ambient is configured, T0 is the time mean of the cold-side
reading and so
depends on the cold offset: it is propagated like every other derived value.

Usage (from the workspace root):

    pip install uncertainties==3.2.3
    python3 tests/tools/gum_vectors.py

Writes tests/vectors/gum_cases.json: per case, the settings, the samples
(exact decimal round-trip of the f64 values) and the expected nominal values
and standard uncertainties (the energies and the exergy destroyed too), and
for each figure its sensitivity coefficients
c_i = df/dx_i to the five inputs (`uncertainties`' own derivatives, signed;
GUM §5.1.3), from which each input's contribution c_i u(x_i) follows (the
uncertainty budget of `heatbound report`).
"""
import json
import math
import os

import uncertainties
from uncertainties import ufloat

HERE = os.path.dirname(os.path.abspath(__file__))
OUT = os.path.join(HERE, "..", "vectors", "gum_cases.json")

U = {"hot_k": 1.5, "cold_k": 0.3, "heat_in_rel": 0.01, "work_rel": 0.008, "heat_out_rel": 0.02}


def samples(n, mode, measured):
    """A run with varying temperatures, powers and sample spacing (1 s or 2 s)."""
    out = []
    t_ms = 0
    for i in range(n):
        x = i / n
        if mode == "engine":
            th = 600.0 + 80.0 * math.sin(2 * math.pi * x) + 15.0 * math.sin(13.0 * x)
            tc = 300.0 + 12.0 * math.cos(2 * math.pi * 1.5 * x)
            qi = 1000.0 + 250.0 * math.sin(2 * math.pi * 2.0 * x + 0.3)
            w = 150.0 + 40.0 * math.cos(2 * math.pi * 0.7 * x)
            qo = (qi - w) * (0.93 + 0.04 * math.sin(5.0 * x)) if measured else None
        else:
            # Heat pump / cooler: q_in = heat delivered to the hot side,
            # w = driving work, q_out = heat drawn from the cold side.
            th = 320.0 + 6.0 * math.sin(2 * math.pi * x)
            tc = 275.0 + 4.0 * math.cos(2 * math.pi * 1.3 * x)
            w = 400.0 + 60.0 * math.sin(2 * math.pi * 0.8 * x)
            qi = 1000.0 + 150.0 * math.sin(2 * math.pi * 1.7 * x)
            qo = (qi - w) * (1.02 + 0.01 * math.cos(4.0 * x)) if measured else None
        out.append({"t_ms": t_ms, "t_hot_k": th, "t_cold_k": tc, "heat_in_w": qi, "work_w": w, "heat_out_w": qo})
        t_ms += 1000 if i % 3 else 2000
    return out


def figures(case):
    mode, measured, ambient = case["mode"], case["measured"], case["ambient_k"]
    d_hot = ufloat(0.0, U["hot_k"], "hot")
    d_cold = ufloat(0.0, U["cold_k"], "cold")
    s_in = ufloat(1.0, U["heat_in_rel"], "heat_in")
    s_w = ufloat(1.0, U["work_rel"], "work")
    s_out = ufloat(1.0, U["heat_out_rel"], "heat_out")

    def point(s):
        th = s["t_hot_k"] + d_hot
        tc = s["t_cold_k"] + d_cold
        qi = s["heat_in_w"] * s_in
        w = s["work_w"] * s_w
        qo = s["heat_out_w"] * s_out if measured else qi - w
        return (qi, w, qo, qi / th, qo / tc, tc)

    pts = [point(s) for s in case["samples"]]
    sums = [0.0] * 6
    duration = 0.0
    for a, b, sa, sb in zip(pts, pts[1:], case["samples"], case["samples"][1:]):
        dt = (sb["t_ms"] - sa["t_ms"]) * 1e-3
        duration += dt
        for k in range(6):
            sums[k] = sums[k] + 0.5 * dt * (a[k] + b[k])
    q_in, w, q_out, s_in_int, s_out_int, tc_int = sums
    t_h = q_in / s_in_int
    t_c = q_out / s_out_int
    r = {"duration_s": duration, "hot_mean_k": t_h, "cold_mean_k": t_c}
    if mode == "engine":
        perf = w / q_in
        bound = 1 - t_c / t_h
        r["efficiency"] = perf
        r["carnot_efficiency"] = bound
        sign = 1.0
    else:
        perf = q_in / w if mode == "heat_pump" else q_out / w
        top = t_h if mode == "heat_pump" else t_c
        bound = top / (t_h - t_c)
        r["cop"] = perf
        r["carnot_cop"] = bound
        sign = -1.0
    r["carnot_margin"] = bound - perf
    if measured:
        # Default T0: the time mean of the cold-side reading.
        t0 = ambient if ambient is not None else tc_int / duration
        loss = q_in - w - q_out
        s_gen = s_out_int + loss / t0 - s_in_int
        r["balance_residual_j"] = sign * loss
    else:
        # Default T0 with heat out inferred: the heat-weighted T_c.
        t0 = ambient if ambient is not None else t_c
        s_gen = s_out_int - s_in_int
    s_gen = sign * s_gen
    r["entropy_generated_j_per_k"] = s_gen
    r["entropy_rate_w_per_k"] = s_gen / duration
    # Gouy-Stodola: exergy destroyed T0 * S_gen, T0 itself measured when
    # it is the cold-side mean.
    r["exergy_destroyed_j"] = t0 * s_gen
    # The energies: scale errors only.
    r["heat_in_j"] = q_in
    r["work_j"] = w
    r["heat_out_j"] = q_out
    inputs = {"hot": d_hot, "cold": d_cold, "heat_in": s_in, "work": s_w, "heat_out": s_out}

    def entry(v):
        e = {"value": uncertainties.nominal_value(v), "u": uncertainties.std_dev(v)}
        derivatives = getattr(v, "derivatives", {})
        e["sensitivity"] = {name: derivatives.get(x, 0.0) for name, x in inputs.items()}
        return e

    return {k: entry(v) for k, v in r.items()}


def main():
    cases = []
    for name, mode, measured, ambient in [
        ("engine_inferred", "engine", False, None),
        ("engine_measured_ambient", "engine", True, 293.15),
        ("engine_measured_default_t0", "engine", True, None),
        ("heat_pump_inferred", "heat_pump", False, None),
        ("heat_pump_measured", "heat_pump", True, 293.15),
        ("cooler_inferred", "cooler", False, None),
        ("cooler_measured_default_t0", "cooler", True, None),
    ]:
        case = {"name": name, "mode": mode, "measured": measured, "ambient_k": ambient, "uncertainty": U}
        case["samples"] = samples(240, mode, measured)
        case["expected"] = figures(case)
        cases.append(case)
    doc = {
        "source": "GUM JCGM 100:2008 §5.1.2 first-order propagation via PyPI uncertainties "
        + uncertainties.__version__
        + ", generated by tests/tools/gum_vectors.py",
        "cases": cases,
    }
    with open(OUT, "w") as f:
        json.dump(doc, f, indent=1)
        f.write("\n")
    print(f"wrote {len(cases)} cases to {os.path.relpath(OUT)}")


if __name__ == "__main__":
    main()
