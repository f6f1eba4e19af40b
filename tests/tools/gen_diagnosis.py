#!/usr/bin/env python3
"""Reference vectors for the consistency diagnosis of docs/diagnosis.md.

An independent implementation of the diagnosis in numpy and scipy. For each
case it builds a window's integrals from chosen true quantities with one
injected sensor bias, then computes:

- the residuals r_E (first law, W), r_S (second law, W/K) and r_H (hot pair,
  K) of docs/diagnosis.md §3, with the mode sign s (+1 engine, −1 heat pump
  or cooler) on r_E's measured balance and on r_S;
- their sensitivity A to the channel errors and to UA, by complex-step
  differentiation of the exact corrected residuals (Squire & Trapp, SIAM
  Review 40(1), 1998: f'(x) = Im f(x + ih)/h, exact to rounding for these
  analytic functions), never from hand-written partials;
- their covariance V = A Σ Aᵀ, the GUM first-order law of propagation with
  correlations kept (JCGM 100:2008 §5.1.2, eq. 13); UA, configured or
  learned, is one more independent column with variance u_UA²;
- over the active relations (the available equalities, and r_S when it is
  negative): the global test γ = rᵀV⁻¹r against the χ² 95 % quantile
  (scipy.stats.chi2), the measurement test z_j and the generalized
  likelihood ratio T_j for a single bias with its linear estimate
  (Narasimhan & Jordache, Data Reconciliation and Gross Error Detection,
  Gulf, 2000, ch. 7: global test, measurement test, GLR);
- the bias of each channel (docs/diagnosis.md §4, "The bias"): the exact
  minimiser of r_eq(b)ᵀ V_eq⁻¹ r_eq(b) over the available equalities (r_E,
  r_H) the channel moves, from their linear GLR estimate, by
  scipy.optimize.least_squares on the whitened residuals polished by
  Gauss–Newton steps (b = 0 when it moves no equality); then, if r_S < 0 as
  measured and still < 0 at that bias, the root of r_S(b) = 0 nearest it
  (bracketed by a scan on both sides, scipy.optimize.brentq, Newton
  polish), and the channel is marked `second_law_binds` (fit_bias says how
  the cases the specification leaves open are read);
- whether removing that bias restores every available relation with the
  original uncertainties, the ranked candidates and the suspect.

A learned UA is computed from a learning window, UA = s·(Q_in − W − Q_out)
/ (H − T0·D) (docs/diagnosis.md §5), its uncertainty propagated from that
window's channels (the partial derivatives by complex step), and is then
passed exactly like a configured one.

Nothing here is taken from heatbound's Rust code; the Rust tests compare the
core implementation with the vectors written here.

Usage (from the workspace root):

    python3 tests/tools/gen_diagnosis.py                 # write the vectors
    python3 tests/tools/gen_diagnosis.py --isolability   # print the sweep

The first writes tests/vectors/diagnosis_cases.json and prints one line per
case (consistent, suspect, candidates). The second writes nothing: it sweeps
each channel's bias in both directions over the relation sets of
docs/diagnosis.md §6 and prints which channel, if any, is named.
Deterministic: fixed case lists, no random numbers.
"""
import json
import math
import os
import sys

import numpy as np
from scipy import optimize, stats

HERE = os.path.dirname(os.path.abspath(__file__))
OUT = os.path.join(HERE, "..", "vectors", "diagnosis_cases.json")

CHANNELS = ["hot", "hot2", "cold", "heat_in", "work", "heat_out"]
POWER = ("heat_in", "work", "heat_out")
SIGN = {"engine": 1.0, "heat_pump": -1.0, "cooler": -1.0}
U_KEY = {
    "hot": "hot_k",
    "hot2": "hot2_k",
    "cold": "cold_k",
    "heat_in": "heat_in_rel",
    "work": "work_rel",
    "heat_out": "heat_out_rel",
}
EQUALITIES = ("first_law", "hot_pair")
# Complex step: small enough that the truncation error is far below
# rounding, and the real part is untouched.
CSTEP = 1e-30


# ---------------------------------------------------------------------------
# The model of docs/diagnosis.md §2-3
# ---------------------------------------------------------------------------


def quantities(inp):
    """The window quantities of §2, as held before any correction."""
    d = inp["duration_s"]
    q_in = inp["heat_in_j"]
    w = inp["work_j"]
    measured = inp["heat_out_j"] is not None
    q_out = inp["heat_out_j"] if measured else q_in - w
    p = inp["hot_pair_integral_k_s"]
    ua = inp["ua"]
    return {
        "sign": SIGN[inp["mode"]],
        "D": d,
        "Q_in": q_in,
        "W": w,
        "Q_out": q_out,
        "measured": measured,
        "T_h": q_in / inp["entropy_in_j_per_k"],
        "T_c": q_out / inp["entropy_out_j_per_k"],
        "T0": inp["t0_k"],
        "t0_is_cold_mean": inp["t0_is_cold_mean"],
        "H": inp["hot_time_integral_k_s"],
        "Delta": None if p is None else p / d,
        "UA": None if ua is None else ua["w_per_k"],
    }


def corrected(q, channel, b):
    """The quantities with bias b removed from one channel (§3, Corrections).

    `channel` may also be "ua" (UA → UA − b), used only to differentiate
    r_E with respect to UA.
    """
    c = dict(q)
    if channel == "hot":
        c["T_h"] = q["T_h"] - b
        c["H"] = q["H"] - b * q["D"]
        if q["Delta"] is not None:
            c["Delta"] = q["Delta"] - b
    elif channel == "hot2":
        c["Delta"] = q["Delta"] + b
    elif channel == "cold":
        c["T_c"] = q["T_c"] - b
        if q["t0_is_cold_mean"]:
            c["T0"] = q["T0"] - b
    elif channel == "heat_in":
        c["Q_in"] = q["Q_in"] / (1 + b)
    elif channel == "work":
        c["W"] = q["W"] / (1 + b)
    elif channel == "heat_out":
        c["Q_out"] = q["Q_out"] / (1 + b)
    elif channel == "ua":
        c["UA"] = q["UA"] - b
    else:
        raise ValueError(channel)
    if not q["measured"]:
        # Inferred heat out follows the corrected heat in and work.
        c["Q_out"] = c["Q_in"] - c["W"]
    return c


def valid(q, channel, b):
    """§4: a correction that leaves a temperature at or below 0 K, or a power
    scale 1 + b at or below zero, is no candidate."""
    if not math.isfinite(b):
        return False
    if channel in POWER and not 1 + b > 0:
        return False
    c = corrected(q, channel, b)
    return c["T_h"] > 0 and c["T_c"] > 0 and c["T0"] > 0


def available(q):
    """The relations this window has, in the order first_law, second_law, hot_pair."""
    rows = []
    if q["measured"] and q["UA"] is not None:
        rows.append("first_law")
    rows.append("second_law")
    if q["Delta"] is not None:
        rows.append("hot_pair")
    return rows


def residuals(q):
    """The residuals of §3 (complex-safe), keyed by relation."""
    s, d = q["sign"], q["D"]
    q_in, w, q_out = q["Q_in"], q["W"], q["Q_out"]
    r = {}
    if q["measured"]:
        if q["UA"] is not None:
            loss = q["UA"] * (q["H"] - q["T0"] * d)
            r["first_law"] = (s * (q_in - w - q_out) - loss) / d
        # Q_out/T_c + (Q_in − W − Q_out)/T0 − Q_in/T_h, grouped so that
        # with T_c = T0 heat out drops out exactly instead of cancelling
        # (two terms growing without bound as its correction grows).
        r["second_law"] = s * (q_out * (1 / q["T_c"] - 1 / q["T0"]) + (q_in - w) / q["T0"] - q_in / q["T_h"]) / d
    else:
        r["second_law"] = s * ((q_in - w) / q["T_c"] - q_in / q["T_h"]) / d
    if q["Delta"] is not None:
        r["hot_pair"] = q["Delta"]
    return r


def residuals_at(q, channel, b, names):
    """The named residuals, exactly recomputed with bias b removed from channel."""
    r = residuals(corrected(q, channel, b))
    return np.array([r[name] for name in names])


def channels_present(q):
    present = ["hot"]
    if q["Delta"] is not None:
        present.append("hot2")
    present += ["cold", "heat_in", "work"]
    if q["measured"]:
        present.append("heat_out")
    return present


# ---------------------------------------------------------------------------
# Sensitivities, covariance, tests
# ---------------------------------------------------------------------------


def jacobian(q, rows, cols):
    """A[i, j] = −∂r_i/∂b_j at b = 0, by complex step on the exact residuals."""
    a = np.zeros((len(rows), len(cols)))
    for j, ch in enumerate(cols):
        r = residuals(corrected(q, ch, 1j * CSTEP))
        for i, name in enumerate(rows):
            a[i, j] = -np.imag(r[name]) / CSTEP
    return a


def variances(inp, cols):
    u = inp["u"]
    return np.array(
        [inp["ua"]["u_w_per_k"] ** 2 if ch == "ua" else u[U_KEY[ch]] ** 2 for ch in cols]
    )


def holds(name, value, u, k):
    """§4: an equality within ±k·u, the second law not below −k·u."""
    if name == "second_law":
        return bool(value >= -k * u)
    return bool(abs(value) <= k * u)


def is_consistent(r, u, k):
    return all(holds(name, value, u[name], k) for name, value in r.items())


def whitener(v):
    """L⁻¹ with V = L Lᵀ, so that |L⁻¹ r|² = rᵀV⁻¹r."""
    return np.linalg.inv(np.linalg.cholesky(v))


def domain(q, ch):
    """The open interval of biases whose correction is valid (§4)."""
    if ch in POWER:
        return -1.0, math.inf
    if ch == "hot":
        return -math.inf, q["T_h"]
    if ch == "cold":
        hi = q["T_c"]
        if q["t0_is_cold_mean"]:
            hi = min(hi, q["T0"])
        return -math.inf, hi
    return -math.inf, math.inf  # hot2 moves only Δ


def fit_equalities(q, ch, eq, v_eq, b0, u_ch):
    """argmin_b r_eq(b)ᵀ V_eq⁻¹ r_eq(b) on the exact corrected residuals of
    the available equalities, from the linear estimate b0.

    None when the minimum is not inside the valid corrections (or the
    search does not settle): the channel then gives no candidate.
    """
    lo, hi = domain(q, ch)
    margin = 1e-9 * max(1.0, abs(lo) if math.isfinite(lo) else 1.0, abs(hi) if math.isfinite(hi) else 1.0)
    lw = whitener(v_eq)

    def fun(x):
        return lw @ residuals_at(q, ch, x[0], eq)

    x0 = min(max(b0, lo + 1e3 * margin), hi - 1e3 * margin)
    sol = optimize.least_squares(
        fun,
        x0=[x0],
        method="trf",
        bounds=([lo + margin], [hi - margin]),
        x_scale=[u_ch],
        xtol=1e-15,
        ftol=1e-15,
        gtol=1e-15,
        max_nfev=1000,
    )
    b = float(sol.x[0])
    # Polish with Gauss–Newton steps (their fixed point is the stationarity
    # condition jᵀr = 0), the derivative by complex step.
    for _ in range(200):
        if not valid(q, ch, b):
            return None
        r = np.real(fun([b]))
        j = np.imag(fun([b + 1j * CSTEP])) / CSTEP
        jj = float(j @ j)
        if jj == 0.0:
            return None
        step = -float(j @ r) / jj
        b += step
        if abs(step) <= 1e-12 * max(u_ch, abs(b)):
            break
    else:
        return None
    if not valid(q, ch, b):
        return None
    # A strict minimum, not a saddle, a maximum, or a flat tail running off
    # to infinity (a power whose corrected value would have to be zero).
    h = 1e-3 * max(u_ch, abs(b))
    if not (valid(q, ch, b - h) and valid(q, ch, b + h)):
        h = 1e-6 * u_ch
    f0, fm, fp = (float(np.sum(np.real(fun([x])) ** 2)) for x in (b, b - h, b + h))
    if not (fm > f0 and fp > f0):
        return None
    return b


def scan_points(q, ch, b, u_ch, side):
    """Trial biases on one side of b (side = +1 or −1), nearest first: steps
    growing geometrically from 1e-6·u, and points closing in on the edge of
    the valid corrections, so that every sign change of a monotonic
    function is bracketed."""
    lo, hi = domain(q, ch)
    edge = hi if side > 0 else lo
    pts = [b + side * u_ch * 2.0 ** (k / 2.0) for k in range(-40, 140)]
    if math.isfinite(edge):
        pts += [edge - (edge - b) * 2.0 ** (-k / 2.0) for k in range(1, 120)]
    pts = sorted({p for p in pts if valid(q, ch, p)}, key=lambda p: abs(p - b))
    return pts


def nearest_root(q, ch, b, u_ch):
    """The root of r_S(b) = 0 nearest b (where r_S(b) < 0); None when r_S has
    no root among the valid corrections (the channel does not move σ̇, or
    cannot bring it to zero).

    The first sign change on each side of b is bracketed by a scan
    (scan_points), each root found by scipy.optimize.brentq and polished by
    Newton steps (derivative by complex step); the nearer one is returned.
    """

    def g(x):
        return float(np.real(residuals(corrected(q, ch, x))["second_law"]))

    def dg(x):
        return float(np.imag(residuals(corrected(q, ch, x + 1j * CSTEP))["second_law"]) / CSTEP)

    roots = []
    for side in (+1.0, -1.0):
        prev = b
        for p in scan_points(q, ch, b, u_ch, side):
            if g(p) >= 0.0:
                x = optimize.brentq(g, min(prev, p), max(prev, p), xtol=1e-300, rtol=4 * np.finfo(float).eps, maxiter=500)
                for _ in range(3):
                    d = dg(x)
                    if d == 0.0 or not math.isfinite(d):
                        break
                    step = -g(x) / d
                    if not valid(q, ch, x + step) or abs(step) > abs(p - prev):
                        break
                    x += step
                roots.append(x)
                break
            prev = p
    if not roots:
        return None
    return min(roots, key=lambda x: abs(x - b))


def fit_bias(q, ch, eq, a_eq_col, v_eq, r_eq, second_law_fails, u_ch):
    """§4, "The bias": (bias, second_law_binds), or None when there is no
    valid correction.

    Where the spec is silent, this reads it so: a channel that moves an
    active relation but whose equality fit has no finite minimum among the
    valid corrections gives no candidate; and when σ̇ still fails at the
    equality fit but r_S(b) has no root among the valid corrections (the
    channel does not move σ̇, as hot2 never does), the bias stays the
    equality fit and the second law does not bind it.
    """
    b = 0.0
    if eq:
        v_inv = np.linalg.inv(v_eq)
        ff = float(a_eq_col @ v_inv @ a_eq_col)
        if ff > 0.0:
            b0 = float(a_eq_col @ v_inv @ r_eq) / ff
            b = fit_equalities(q, ch, eq, v_eq, b0, u_ch)
            if b is None:
                return None
    if not valid(q, ch, b):
        return None
    binds = False
    if second_law_fails and residuals(corrected(q, ch, b))["second_law"] < 0.0:
        root = nearest_root(q, ch, b, u_ch)
        if root is not None:
            b = root
            binds = True
    if not valid(q, ch, b):
        return None
    return b, binds


def explains(q, ch, b, rows, u, k):
    """§4: with the bias removed, every available relation holds (same u)."""
    if not valid(q, ch, b):
        return False
    r = residuals(corrected(q, ch, b))
    if not all(math.isfinite(r[name]) for name in rows):
        return False
    return is_consistent({name: r[name] for name in rows}, u, k)


def diagnose(inp):
    q = quantities(inp)
    k = inp["coverage_factor"]
    rows = available(q)
    present = channels_present(q)
    cols = present + (["ua"] if "first_law" in rows else [])
    a = jacobian(q, rows, cols)
    sig = variances(inp, cols)
    v = a @ np.diag(sig) @ a.T
    u = {name: math.sqrt(v[i, i]) for i, name in enumerate(rows)}
    r0 = residuals(q)
    r = {name: float(np.real(r0[name])) for name in rows}
    consistent = is_consistent(r, u, k)

    # The active relations: the equalities, and the second law when σ̇ < 0.
    act = [name for name in rows if name != "second_law" or r[name] < 0]
    ia = [rows.index(name) for name in act]
    dof = len(act)
    if dof:
        v_act = v[np.ix_(ia, ia)]
        v_inv = np.linalg.inv(v_act)
        r_act = np.array([r[name] for name in act])
        gamma = float(r_act @ v_inv @ r_act)
        critical = float(stats.chi2.ppf(0.95, dof))
        a_act = a[ia, :]
        est = np.diag(sig) @ a_act.T @ v_inv @ r_act
        w_cov = np.diag(sig) @ a_act.T @ v_inv @ a_act @ np.diag(sig)
    else:
        gamma, critical = 0.0, None

    # The available equalities, for each channel's own fit.
    eq = [name for name in rows if name in EQUALITIES]
    ie = [rows.index(name) for name in eq]
    v_eq = v[np.ix_(ie, ie)] if eq else None
    r_eq = np.array([r[name] for name in eq])
    second_law_fails = r["second_law"] < 0

    channels = {}
    for j, ch in enumerate(present):
        entry = {
            "z": 0.0,
            "glr": 0.0,
            "bias_linear": None,
            "bias": None,
            "explains": False,
            "second_law_binds": False,
        }
        if dof:
            f = a[ia, j]
            ff = float(f @ v_inv @ f)
            if ff > 0.0:
                fr = float(f @ v_inv @ r_act)
                entry["z"] = float(abs(est[j]) / math.sqrt(w_cov[j, j]))
                entry["glr"] = fr * fr / ff
                entry["bias_linear"] = fr / ff
        # Candidates only when inconsistent, and only channels that move an
        # active relation (glr > 0).
        if not consistent and entry["glr"] > 0.0:
            u_ch = inp["u"][U_KEY[ch]]
            fit = fit_bias(q, ch, eq, a[ie, j], v_eq, r_eq, second_law_fails, u_ch)
            if fit is not None:
                b, binds = fit
                entry["bias"] = b
                entry["second_law_binds"] = binds
                entry["explains"] = explains(q, ch, b, rows, u, k)
        channels[ch] = entry

    if consistent:
        candidates, suspect = [], None
    else:
        with_bias = [ch for ch in present if channels[ch]["bias"] is not None]

        def rank(ch):
            return abs(channels[ch]["bias"]) / inp["u"][U_KEY[ch]]

        yes = sorted((ch for ch in with_bias if channels[ch]["explains"]), key=rank)
        no = sorted((ch for ch in with_bias if not channels[ch]["explains"]), key=rank)
        candidates = yes + no
        suspect = yes[0] if len(yes) == 1 else None

    res = {
        "first_law_w": r.get("first_law"),
        "u_first_law_w": u.get("first_law"),
        "second_law_w_per_k": r["second_law"],
        "u_second_law_w_per_k": u["second_law"],
        "hot_pair_k": r.get("hot_pair"),
        "u_hot_pair_k": u.get("hot_pair"),
    }
    return {
        "residuals": res,
        "consistent": consistent,
        "active": act,
        "gamma": gamma,
        "dof": dof,
        "critical": critical,
        "channels": channels,
        "candidates": candidates,
        "suspect": suspect,
    }


# ---------------------------------------------------------------------------
# Windows built from true constant quantities plus one injected bias
# ---------------------------------------------------------------------------

D_S = 60.0
U_BASE = {
    "hot_k": 1.2,
    "hot2_k": 1.2,
    "cold_k": 0.3,
    "heat_in_rel": 0.005,
    "work_rel": 0.005,
    "heat_out_rel": 0.01,
}


def entropy(q, t):
    """∫q/T dt = Q/T for a constant T, rounded so that Q/(Q/T) gives T back
    exactly: with T0 the cold-side mean, T_c and T0 are then the same
    number, and heat out's effect on σ̇, Q_out·(1/T_c − 1/T0), is exactly
    zero rather than rounding noise (whose 'root' would sit at 1 + b ≈ 0)."""
    s = q / t
    for trial in (s, np.nextafter(s, math.inf), np.nextafter(s, -math.inf)):
        if q / float(trial) == t:
            return float(trial)
    return s


def window(
    mode="engine",
    t_hot=700.0,
    t_cold=300.0,
    q_in=1000.0,
    w=540.0,
    ua_true=0.5,
    ambient=None,
    measured=False,
    hot2=False,
    bias=None,
    d=D_S,
):
    """A window's integrals for constant temperatures and powers.

    Truth: loss = UA·(T_hot − T0), q_out = q_in − w − sign·loss. Readings:
    temperatures truth + b, powers truth·(1 + b), for the one biased
    channel in `bias` = (channel, b). T0 is `ambient` when configured,
    else the cold-side reading.
    """
    sign = SIGN[mode]
    t0_true = ambient if ambient is not None else t_cold
    loss = ua_true * (t_hot - t0_true)
    q_out = q_in - w - sign * loss
    e = {ch: 0.0 for ch in CHANNELS}
    if bias is not None:
        e[bias[0]] = bias[1]
    th = t_hot + e["hot"]
    th2 = t_hot + e["hot2"]
    tc = t_cold + e["cold"]
    qi = q_in * (1 + e["heat_in"]) * d
    wr = w * (1 + e["work"]) * d
    qo = q_out * (1 + e["heat_out"]) * d
    u = dict(U_BASE)
    if not hot2:
        u["hot2_k"] = None
    return {
        "mode": mode,
        "duration_s": d,
        "heat_in_j": qi,
        "work_j": wr,
        "heat_out_j": qo if measured else None,
        "entropy_in_j_per_k": entropy(qi, th),
        "entropy_out_j_per_k": entropy(qo if measured else qi - wr, tc),
        "hot_time_integral_k_s": th * d,
        "hot_pair_integral_k_s": (th - th2) * d if hot2 else None,
        "t0_k": ambient if ambient is not None else tc,
        "t0_is_cold_mean": ambient is None,
        "ua": None,
        "u": u,
        "coverage_factor": 2.0,
        # Kept for the printed table only; removed before writing.
        "_injected": bias,
    }


def configured_ua(inp, w_per_k, u_w_per_k):
    inp["ua"] = {"w_per_k": w_per_k, "u_w_per_k": u_w_per_k, "source": "configured"}
    return inp


def learned_ua(learning):
    """UA and its standard uncertainty from a learning window (§5).

    UA = s·(Q_in − W − Q_out)/(H − T0·D) on the learning window; u_UA is the
    root sum of squares of ∂UA/∂e_j · u_j over that window's channels, the
    derivatives by complex step of UA on the corrected window.
    """

    def ua_of(q):
        return q["sign"] * (q["Q_in"] - q["W"] - q["Q_out"]) / (q["H"] - q["T0"] * q["D"])

    q = quantities(learning)
    ua = float(ua_of(q))
    u = learning["u"]
    var = 0.0
    for ch in channels_present(q):
        partial = -np.imag(ua_of(corrected(q, ch, 1j * CSTEP))) / CSTEP
        var += (partial * u[U_KEY[ch]]) ** 2
    window_fields = {k: v for k, v in learning.items() if not k.startswith("_") and k not in ("ua", "u", "coverage_factor")}
    return {"w_per_k": ua, "u_w_per_k": math.sqrt(var), "source": "learned", "learned_from": window_fields}


# The learning window of the learned-UA rig: the same rig (UA 0.5 W/K,
# ambient 295 K) at a lower firing rate.
LEARN = dict(t_hot=640.0, q_in=800.0, w=400.0, ambient=295.0, measured=True)


def learned_case(bias=None, learn_bias=None):
    inp = window(measured=True, ambient=295.0, bias=bias)
    inp["ua"] = learned_ua(window(bias=learn_bias, **LEARN))
    return inp


def measured_ua(u_ua, ambient=None, bias=None, hot2=False, **kw):
    inp = window(measured=True, ambient=ambient, bias=bias, hot2=hot2, **kw)
    return configured_ua(inp, kw.get("ua_true", 0.5), u_ua)


PUMP = dict(mode="heat_pump", t_hot=330.0, t_cold=280.0, q_in=1000.0, w=300.0, ua_true=2.0, ambient=293.0)
COOL = dict(mode="cooler", t_hot=300.0, t_cold=260.0, q_in=1000.0, w=250.0, ua_true=0.0)


def cases():
    """(name, note, input)."""
    c = []

    def add(name, note, inp):
        c.append((name, note, inp))

    # Second law only.
    add("inferred_healthy", "heat out inferred, no hot2, no fault", window())
    add(
        "inferred_hot_minus80",
        "hot reads 80 K low: the second law fails; hot, cold, heat_in and work can all restore it",
        window(bias=("hot", -80.0)),
    )
    add(
        "inferred_cold_plus40",
        "cold reads 40 K high: the second law fails; no relation tells the channels apart",
        window(bias=("cold", 40.0)),
    )
    add(
        "inferred_work_plus10pct",
        "work reads 10 % high: the second law fails and binds every candidate's bias",
        window(bias=("work", 0.10)),
    )
    # Second law + redundancy.
    add("inferred_hot2_healthy", "heat out inferred, hot2 present, no fault", window(hot2=True))
    add(
        "inferred_hot2_hot_plus60",
        "hot reads 60 K high: the redundancy fails, the second law moves away from its bound",
        window(hot2=True, bias=("hot", 60.0)),
    )
    add(
        "inferred_hot2_hot_minus80",
        "hot reads 80 K low: the redundancy and the second law both fail",
        window(hot2=True, bias=("hot", -80.0)),
    )
    add(
        "inferred_hot2_hot2_plus60",
        "hot2 reads 60 K high: only the redundancy moves; removing it from hot instead raises T_h",
        window(hot2=True, bias=("hot2", 60.0)),
    )
    add(
        "inferred_hot2_hot2_minus60",
        "hot2 reads 60 K low: only the redundancy moves; removing it from hot instead would break the second law",
        window(hot2=True, bias=("hot2", -60.0)),
    )
    add(
        "inferred_hot2_cold_plus40",
        "cold reads 40 K high: the second law fails, the redundancy holds",
        window(hot2=True, bias=("cold", 40.0)),
    )
    add(
        "inferred_hot2_heat_in_minus10pct",
        "heat in reads 10 % low: the second law fails, the redundancy holds",
        window(hot2=True, bias=("heat_in", -0.10)),
    )
    add(
        "inferred_hot2_work_plus10pct",
        "work reads 10 % high: the second law fails and binds; hot is held by the redundancy",
        window(hot2=True, bias=("work", 0.10)),
    )
    # First law + second law, UA configured.
    add(
        "measured_ua_healthy",
        "heat out measured, UA configured 0.5 ± 0.005 W/K, T0 the cold mean, no fault",
        measured_ua(0.005),
    )
    add(
        "measured_ua_hot_minus80_inside_band",
        "hot reads 80 K low with a wide first-law band (u_UA 0.06 W/K): UA·b = 40 W stays inside it",
        measured_ua(0.06, bias=("hot", -80.0)),
    )
    add(
        "measured_ua_hot_minus80_outside_band",
        "hot reads 80 K low with a narrow first-law band (u_UA 0.005 W/K): UA·b = 40 W fails it too",
        measured_ua(0.005, bias=("hot", -80.0)),
    )
    add(
        "measured_ua_cold_plus40_t0_cold_mean",
        "cold reads 40 K high and T0 is the cold mean: both relations move",
        measured_ua(0.005, bias=("cold", 40.0)),
    )
    add(
        "measured_ua_cold_plus80_t0_configured",
        "cold reads 80 K high, T0 configured 295 K: only the second law moves; cold binds on it",
        measured_ua(0.005, ambient=295.0, bias=("cold", 80.0)),
    )
    add(
        "measured_ua_heat_in_plus5pct",
        "heat in reads 5 % high: the first law fails",
        measured_ua(0.005, bias=("heat_in", 0.05)),
    )
    add(
        "measured_ua_work_minus8pct",
        "work reads 8 % low: the first law fails",
        measured_ua(0.005, bias=("work", -0.08)),
    )
    add(
        "measured_ua_heat_out_plus15pct",
        "heat out reads 15 % high: the first law fails",
        measured_ua(0.005, bias=("heat_out", 0.15)),
    )
    # First law + second law, UA learned.
    add(
        "learned_ua_healthy",
        "UA learned from a healthy window at 800 W / 640 K, ambient 295 K; no fault",
        learned_case(),
    )
    add(
        "learned_ua_hot_minus80_after_learning",
        "UA learned healthy; hot then reads 80 K low",
        learned_case(bias=("hot", -80.0)),
    )
    add(
        "learned_ua_hot_minus80_throughout",
        "hot reads 80 K low in the learning window too, so the learned UA carries it",
        learned_case(bias=("hot", -80.0), learn_bias=("hot", -80.0)),
    )
    add(
        "learned_ua_heat_out_plus15pct_after_learning",
        "UA learned healthy; heat out then reads 15 % high",
        learned_case(bias=("heat_out", 0.15)),
    )
    # All three relations.
    three = dict(hot2=True, ambient=295.0)
    add(
        "all_three_healthy",
        "heat out measured, UA configured, hot2, T0 configured 295 K; no fault",
        measured_ua(0.005, **three),
    )
    add(
        "all_three_hot_minus80",
        "hot reads 80 K low: all three relations move",
        measured_ua(0.005, bias=("hot", -80.0), **three),
    )
    add(
        "all_three_hot_plus60",
        "hot reads 60 K high: the first law and the redundancy fail",
        measured_ua(0.005, bias=("hot", 60.0), **three),
    )
    add(
        "all_three_hot2_plus60",
        "hot2 reads 60 K high: only the redundancy moves",
        measured_ua(0.005, bias=("hot2", 60.0), **three),
    )
    add(
        "all_three_cold_plus80",
        "cold reads 80 K high, T0 configured: only the second law fails; cold binds on it",
        measured_ua(0.005, bias=("cold", 80.0), **three),
    )
    add(
        "all_three_cold_plus80_t0_cold_mean",
        "cold reads 80 K high, T0 the cold mean: the first law and the second law fail",
        measured_ua(0.005, bias=("cold", 80.0), hot2=True),
    )
    add(
        "all_three_heat_in_plus5pct",
        "heat in reads 5 % high",
        measured_ua(0.005, bias=("heat_in", 0.05), **three),
    )
    add(
        "all_three_work_minus8pct",
        "work reads 8 % low",
        measured_ua(0.005, bias=("work", -0.08), **three),
    )
    add(
        "all_three_heat_out_plus15pct",
        "heat out reads 15 % high",
        measured_ua(0.005, bias=("heat_out", 0.15), **three),
    )
    add(
        "all_three_hot_plus2_within_uncertainty",
        "hot reads 2 K high, inside its band: consistent, no one named",
        measured_ua(0.005, bias=("hot", 2.0), **three),
    )
    # Heat pump: heat_in is the heat delivered to the hot side, work the
    # driving work, heat_out the heat drawn from the cold side.
    add("heat_pump_measured_healthy", "heat pump, heat out measured, UA 2 ± 0.02 W/K, T0 293 K", measured_ua(0.02, **PUMP))
    add(
        "heat_pump_measured_hot_plus30",
        "heat pump, hot reads 30 K high: the first law fails, the second law only moves towards its bound",
        measured_ua(0.02, bias=("hot", 30.0), **PUMP),
    )
    add(
        "heat_pump_measured_hot_plus80",
        "heat pump, hot reads 80 K high: the first law and the second law fail",
        measured_ua(0.02, bias=("hot", 80.0), **PUMP),
    )
    add(
        "heat_pump_measured_work_minus10pct",
        "heat pump, work reads 10 % low: the second law and the first law fail",
        measured_ua(0.02, bias=("work", -0.10), **PUMP),
    )
    add(
        "heat_pump_inferred_hot2_hot_plus80",
        "heat pump, heat out inferred, hot2: hot reads 80 K high, the redundancy and the second law fail",
        window(hot2=True, bias=("hot", 80.0), **PUMP),
    )
    add(
        "heat_pump_inferred_hot2_cold_minus55",
        "heat pump, heat out inferred, hot2: cold reads 55 K low, only the second law fails and binds",
        window(hot2=True, bias=("cold", -55.0), **PUMP),
    )
    add(
        "heat_pump_all_three_work_minus52pct",
        "heat pump, all three relations: work reads 52 % low; its linear estimate over the first law is below −1, "
        "its exact fit is not; heat in explains as well, so no suspect",
        measured_ua(0.02, hot2=True, bias=("work", -0.52), **PUMP),
    )
    add("cooler_inferred_healthy", "cooler, heat out inferred, no loss to the room", window(**COOL))
    add(
        "cooler_inferred_cold_minus50",
        "cooler, cold reads 50 K low: the second law fails",
        window(bias=("cold", -50.0), **COOL),
    )
    add(
        "cooler_inferred_hot2_hot2_plus60",
        "cooler, hot2 reads 60 K high: only the redundancy moves; removing it from hot instead would break the second law",
        window(hot2=True, bias=("hot2", 60.0), **COOL),
    )
    # Edges of the bias rule.
    add(
        "inferred_hot2_hot_minus50",
        "hot reads 50 K low: the pair fails, σ̇ is negative but inside its band; hot2, which σ̇ does not "
        "see, has no root to bind to, keeps its fit to the pair and explains too: no suspect",
        window(hot2=True, bias=("hot", -50.0)),
    )
    add(
        "measured_ua_hot_minus60_t0_configured",
        "hot reads 60 K low, T0 configured: the first law fails, σ̇ is negative inside its band; heat out "
        "restores the first law and cannot bring σ̇ to zero, yet leaves it inside its band: it explains too",
        measured_ua(0.005, ambient=295.0, bias=("hot", -60.0)),
    )
    add(
        "all_three_heat_out_minus60pct",
        "heat out reads 60 % low: the linear estimate of its bias is below −1, the exact fit to the first "
        "law is −0.6; the only channel that explains",
        measured_ua(0.005, bias=("heat_out", -0.60), **three),
    )
    add(
        "all_three_heat_in_plus30pct",
        "heat in reads 30 % high: heat out's linear estimate is below −1, its exact fit (about −0.54) "
        "explains as well as heat in: no suspect",
        measured_ua(0.005, bias=("heat_in", 0.30), **three),
    )
    add(
        "cooler_inferred_hot2_hot_plus220",
        "cooler, hot reads 220 K high: work's root of σ̇ is −0.5, while a Newton step from 0 lands on 1 + b = 0",
        window(hot2=True, bias=("hot", 220.0), **COOL),
    )
    add(
        "measured_ua_heat_in_minus44pct_t0_configured",
        "heat in reads 44 % low, T0 configured: the first law would need a negative heat out, so heat "
        "out's fit has no finite minimum and it is no candidate",
        measured_ua(0.005, ambient=295.0, bias=("heat_in", -0.44)),
    )
    return c


# ---------------------------------------------------------------------------
# Isolability sweep (printed, not written)
# ---------------------------------------------------------------------------

SWEEP = {
    "hot": [-300.0, -120.0, -70.0, -60.0, -30.0, -20.0, 20.0, 30.0, 80.0, 200.0],
    "hot2": [-80.0, -60.0, -50.0, -20.0, 20.0, 30.0, 80.0],
    "cold": [-60.0, -30.0, 30.0, 40.0, 70.0, 80.0],
    "heat_in": [-0.30, -0.10, 0.03, 0.10, 0.30],
    "work": [-0.30, -0.10, 0.10, 0.20, 0.30],
    "heat_out": [-0.60, -0.30, -0.10, 0.10, 0.30],
}


def relation_sets():
    """(label, builder(bias) -> input, channels) for the sets of §6."""
    return [
        ("a: second law only", lambda b: window(bias=b), ["hot", "cold", "heat_in", "work"]),
        ("b: second law + hot pair", lambda b: window(hot2=True, bias=b), ["hot", "hot2", "cold", "heat_in", "work"]),
        (
            "c: first + second law, T0 configured",
            lambda b: measured_ua(0.005, ambient=295.0, bias=b),
            ["hot", "cold", "heat_in", "work", "heat_out"],
        ),
        (
            "c: first + second law, T0 cold mean",
            lambda b: measured_ua(0.005, bias=b),
            ["hot", "cold", "heat_in", "work", "heat_out"],
        ),
        (
            "c: first + second law, T0 configured, wide band (u_UA 0.06)",
            lambda b: measured_ua(0.06, ambient=295.0, bias=b),
            ["hot"],
        ),
        (
            "d: all three, T0 configured",
            lambda b: measured_ua(0.005, ambient=295.0, hot2=True, bias=b),
            CHANNELS,
        ),
        (
            "d: all three, T0 cold mean",
            lambda b: measured_ua(0.005, hot2=True, bias=b),
            CHANNELS,
        ),
        (
            "b: heat pump, second law + hot pair",
            lambda b: window(hot2=True, bias=b, **PUMP),
            ["hot", "hot2", "cold", "heat_in", "work"],
        ),
        (
            "d: heat pump, all three, T0 configured",
            lambda b: measured_ua(0.02, hot2=True, bias=b, **PUMP),
            CHANNELS,
        ),
    ]


def isolability():
    print("engine 700 K / 300 K, 1000 W in, 540 W work, UA 0.5 ± 0.005 W/K (T0 295 K when configured);")
    print("heat pump 330 K / 280 K, 1000 W delivered, 300 W work, UA 2 ± 0.02 W/K, T0 293 K; k = 2")
    print(f"{'relations':58} {'injected':14} {'failing':28} {'suspect':9} candidates (* explains, ^ second law binds) bias")
    for label, build, chans in relation_sets():
        for ch in chans:
            for b in SWEEP[ch]:
                inp = build((ch, b))
                inp.pop("_injected")
                exp = diagnose(inp)
                q = quantities(inp)
                r = exp["residuals"]
                u = {
                    "first_law": r["u_first_law_w"],
                    "second_law": r["u_second_law_w_per_k"],
                    "hot_pair": r["u_hot_pair_k"],
                }
                val = {
                    "first_law": r["first_law_w"],
                    "second_law": r["second_law_w_per_k"],
                    "hot_pair": r["hot_pair_k"],
                }
                failing = [n for n in available(q) if not holds(n, val[n], u[n], inp["coverage_factor"])]
                cands = ", ".join(
                    f"{c}{'*' if exp['channels'][c]['explains'] else ''}"
                    f"{'^' if exp['channels'][c]['second_law_binds'] else ''}"
                    f"({exp['channels'][c]['bias']:+.3g})"
                    for c in exp["candidates"]
                )
                print(
                    f"{label:58} {ch + ' ' + format(b, '+g'):14} {','.join(failing) or '-':28} "
                    f"{str(exp['suspect']):9} {cands}"
                )
        print()


def main():
    if "--isolability" in sys.argv[1:]:
        isolability()
        return
    out_cases = []
    print(f"{'case':46} {'injected':16} {'consistent':10} {'suspect':9} {'its bias':>10}  candidates (* explains, ^ second law binds)")
    for name, note, inp in cases():
        injected = inp.pop("_injected")
        exp = diagnose(inp)
        out_cases.append({"name": name, "note": note, "input": inp, "expected": exp})
        cands = ", ".join(
            f"{ch}{'*' if exp['channels'][ch]['explains'] else ''}"
            f"{'^' if exp['channels'][ch]['second_law_binds'] else ''}"
            for ch in exp["candidates"]
        )
        inj = "-" if injected is None else f"{injected[0]} {injected[1]:+g}"
        sb = "" if exp["suspect"] is None else f"{exp['channels'][exp['suspect']]['bias']:+.4g}"
        print(f"{name:46} {inj:16} {str(exp['consistent']):10} {str(exp['suspect']):9} {sb:>10}  {cands}")
    doc = {
        "source": (
            "tests/tools/gen_diagnosis.py: docs/diagnosis.md implemented independently in numpy "
            + np.__version__
            + " / scipy "
            + __import__("scipy").__version__
            + "; sensitivities by complex-step differentiation of the exact corrected residuals; "
            "covariance by GUM first-order propagation (JCGM 100:2008 §5.1.2), UA an independent "
            "column; global test, measurement test and GLR after Narasimhan & Jordache (2000) over "
            "the active relations; bias fitted to the available equalities by "
            "scipy.optimize.least_squares on the whitened residuals, polished by Gauss–Newton, then "
            "bound by the second law when it still fails (nearest root of r_S: bracketing scan, "
            "scipy.optimize.brentq, Newton polish)"
        ),
        "cases": out_cases,
    }
    with open(OUT, "w", encoding="utf-8") as fh:
        json.dump(doc, fh, indent=1, ensure_ascii=False)
        fh.write("\n")


if __name__ == "__main__":
    main()
