#!/usr/bin/env python3
"""Make the demo capture scenarios/captures/passive-lag-lead-r2-high.csv (numpy only).

The circuit of scenarios/passive-lag-lead.toml as built on an imaginary bench: R1 ∥ C1 from
the input to the output, R2 from the output to ground, driven by the generator behind its
50 Ω output resistance — except that R2 is 10.4 kΩ instead of 10 kΩ (+4 %, outside its 1 %
tolerance). The pulse is the one `pulseplan plan scenarios/passive-lag-lead.toml` recommends
(area 100 µV·s, 50 % width 27.64 µs, 10–90 % edges 276 ns, so 3.618 V), recorded on a second
channel at the generator ("gen", 1 mV rms noise) so the recovery measures the pulse actually
applied; the record is sampled every 0.4 µs from 150 µs before the trigger to 1.6 ms after it,
with 2 mV rms of white noise and a 12 mV offset on the output. All values are invented.

One energy store, so the response is worked by hand: with x the voltage across C1,
  C1·x' = (u − x)/(R2 + Rs) − x/R1,   v_out = (u − x)·R2/(R2 + Rs),
and a trapezoid u is a sum of ramps, each answered exactly by the first-order system.

Run:  python3 scenarios/captures/make_demo_capture.py
"""

from pathlib import Path

import numpy as np

RS, R1, C1, R2 = 50.0, 47e3, 22e-9, 10.4e3
WIDTH_50, EDGE_10_90 = 27.64e-6, 276e-9
AMPLITUDE = 100e-6 / WIDTH_50
STEP, PRE, POST = 0.4e-6, 150e-6, 1.6e-3
NOISE, OFFSET, SEED = 2e-3, 12e-3, 2024
GEN_NOISE = 1e-3


def response(t):
    """Exact v_out(t) for the trapezoid starting at t = 0."""
    ramp = EDGE_10_90 / 0.8                       # full 0–100 % ramp
    flat = WIDTH_50 - ramp                        # 50 % width = flat + ramp
    corners = [(0.0, AMPLITUDE / ramp), (ramp, -AMPLITUDE / ramp),
               (ramp + flat, -AMPLITUDE / ramp), (2 * ramp + flat, AMPLITUDE / ramp)]
    a = -(1.0 / (R2 + RS) + 1.0 / R1) / C1        # x' = a x + b u
    b = 1.0 / ((R2 + RS) * C1)
    u = np.zeros_like(t)
    x = np.zeros_like(t)
    for tj, sj in corners:
        s = np.clip(t - tj, 0.0, None)
        u += sj * s
        # Ramp response of x' = a x + b u: b·(e^(as) − 1 − a s)/a².
        x += sj * b * (np.expm1(a * s) - a * s) / a**2
    return (u - x) * R2 / (R2 + RS), u


def main():
    rng = np.random.default_rng(SEED)
    t = -PRE + STEP * np.arange(int(round((PRE + POST) / STEP)) + 1)
    out_v, gen_v = response(t)
    y = out_v + OFFSET + NOISE * rng.standard_normal(t.size)
    g = gen_v + GEN_NOISE * rng.standard_normal(t.size)
    out = Path(__file__).with_name("passive-lag-lead-r2-high.csv")
    lines = ["Record,valve positioner lag-lead, bench 2",
             "Sample interval,%.6g s" % STEP,
             "Record length,%d" % t.size,
             "Note,trigger at t = 0 on the generator's sync output",
             "time (s),out (V),gen (V)"]
    lines += ["%.7e,%.6e,%.6e" % (ti, yi, gi) for ti, yi, gi in zip(t, y, g)]
    out.write_text("\n".join(lines) + "\n")
    print("wrote %s (%d samples)" % (out, t.size))


if __name__ == "__main__":
    main()
