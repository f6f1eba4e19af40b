#!/usr/bin/env python3
"""Writes examples/bench-run.csv: a deterministic, simulated 30-minute run of a
bench Stirling-type engine, for `heatbound analyze`.

    python3 examples/make_bench_run.py > examples/bench-run.csv
    heatbound analyze examples/bench-run.csv --config examples/rig.toml

The rig (our own scenario, round numbers chosen for plausibility):
- a 400 W electric heater on the hot head (heat capacity 110 J/K), which also
  loses 0.09 W/K x (T_hot - T_ambient) to the room; heat_in_w is the heater's
  electric power, so the room loss and the heat stored while warming up show
  as a positive energy-balance residual;
- a water-cooled jacket on the cold side (0.6 kg of water, 2500 J/K), coolant
  in at 18 degC, 0.012 kg/s; heat out is measured by coolant calorimetry,
  q = m_dot * c_p * (T_cold - T_in);
- shaft work at 18 % of the Carnot bound of the momentary temperatures, once
  the engine has started (it needs the head above about 150 degC).

Timeline, 1 Hz with small timing jitter:
- 0-600 s: warming up, hot side 30 -> ~550 degC;
- 600-1300 s: running steady, efficiency about 10 %, Carnot about 0.64;
- 1300 s: the coolant pump fails. The flow decays with a 15 s time constant
  and the flow meter's low-flow cut-off then reads exactly zero, so the
  calorimetric heat out collapses to 0 while the rejected heat really goes
  into warming the jacket water. The cold side climbs, the head follows, and
  the hot side passes the rig's 900 K limit.
- A few NaN and empty readings (an intermittent thermocouple, a dropped
  field) show invalid-sample handling.

True physics keeps S_gen >= 0: every heat flow runs from hot to cold.
Noise comes from a 64-bit linear congruential generator with a fixed seed, so
the file is identical on every run.
"""

import math
import sys

SEED = 20240611
_state = SEED


def uniform():
    """Uniform in [0, 1) from a 64-bit LCG (Knuth's MMIX constants)."""
    global _state
    _state = (6364136223846793005 * _state + 1442695040888963407) % (1 << 64)
    return (_state >> 11) / float(1 << 53)


def gauss(sigma):
    """Approximately normal noise: the sum of four uniforms (variance 1/3)."""
    return sigma * (sum(uniform() for _ in range(4)) - 2.0) * math.sqrt(3.0)


AMBIENT_C = 20.0
HEATER_W = 400.0
HEAD_J_PER_K = 110.0
HEAD_LOSS_W_PER_K = 0.09
JACKET_J_PER_K = 2500.0
COOLANT_IN_C = 18.0
FLOW_KG_S = 0.012
CP_WATER = 4186.0
FLOW_CUTOFF_KG_S = 0.0006  # the meter reads 0 below 5 % of nominal flow
FRACTION_OF_CARNOT = 0.18
PUMP_FAILS_S = 1300.0
DURATION_S = 1800
# Conductance from the head through the engine to the jacket, W/K; with the
# heater and room loss it sets the head near 550 degC in steady running.
ENGINE_W_PER_K = 0.67


def main():
    out = sys.stdout
    # Columns in a non-canonical order, in degC, plus an extra column the
    # replay ignores.
    out.write("time_s,hot_c,cold_c,heat_in_w,work_w,heat_out_w,coolant_flow_kg_s\n")
    t_hot = 30.0
    t_cold = 18.5
    dt = 1.0
    for i in range(DURATION_S):
        t = float(i)
        flow = FLOW_KG_S if t < PUMP_FAILS_S else FLOW_KG_S * math.exp(-(t - PUMP_FAILS_S) / 15.0)
        # Heat through the engine from head to jacket, and the work it makes.
        through = max(ENGINE_W_PER_K * (t_hot - t_cold), 0.0)
        started = min(max((t_hot - 150.0) / 250.0, 0.0), 1.0)
        carnot = max(1.0 - (t_cold + 273.15) / (t_hot + 273.15), 0.0)
        work = FRACTION_OF_CARNOT * carnot * started * through
        room = HEAD_LOSS_W_PER_K * (t_hot - AMBIENT_C)
        rejected = through - work
        coolant = flow * CP_WATER * (t_cold - COOLANT_IN_C)
        # Explicit Euler, 1 s steps: both time constants are far longer.
        t_hot_next = t_hot + dt * (HEATER_W - through - room) / HEAD_J_PER_K
        t_cold_next = t_cold + dt * (rejected - coolant) / JACKET_J_PER_K

        # Heat in is the heater's electric power, as a bench logs it: what the
        # head stores and loses to the room shows up as a positive
        # energy-balance residual. The readings add sensor noise.
        heat_in = HEATER_W
        measured_flow = flow if flow >= FLOW_CUTOFF_KG_S else 0.0
        heat_out = measured_flow * CP_WATER * (t_cold - COOLANT_IN_C)

        row = {
            "time_s": f"{t + 0.02 * (uniform() - 0.5) + 0.5:.3f}",
            "hot_c": f"{t_hot + gauss(0.3):.2f}",
            "cold_c": f"{t_cold + gauss(0.05):.3f}",
            "heat_in_w": f"{heat_in * (1.0 + gauss(0.002)):.2f}",
            "work_w": f"{work + gauss(0.15):.2f}",
            "heat_out_w": f"{heat_out * (1.0 + gauss(0.005)) + (gauss(0.4) if measured_flow > 0 else 0.0):.2f}",
            "coolant_flow_kg_s": f"{measured_flow:.5f}",
        }
        # An intermittent hot-side thermocouple, a dropped field and a NaN
        # from the cold-side converter: short, so counted but not alarmed.
        if 812 <= i <= 814:
            row["hot_c"] = "NaN"
        if i == 1000:
            row["work_w"] = ""
        if i == 1101:
            row["cold_c"] = "nan"
        out.write(",".join(row.values()) + "\n")
        t_hot, t_cold = t_hot_next, t_cold_next


if __name__ == "__main__":
    main()
