#!/usr/bin/env python3
"""The demo converter's closed-loop start-up as a designer might script it with a
general-purpose stiff ODE solver: the cost peer of `cargo bench --bench ode_peer`.

Not a circuit simulator and not a check of stepflux: it is the same converter
(scenarios/demo-startup.json, read from the file) written as switched ODEs and solved
with scipy's Radau method (rtol 1e-10, atol 1e-12) with event location, one
`solve_ivp` call per interval between switching instants. Its answer is printed (output
voltage at the end, time to 90 %) so a reader sees it solved the same start-up.

Simplifications against stepflux's model, each of which makes this script cheaper, so
the measured ratio is if anything an underestimate: ideal switches and diodes
(forward drop plus on-resistance when conducting, open otherwise: no off-state
resistances, no leakage ringing after reset), an ideal error amplifier (the
compensation's transfer function, output clamped to its rails), no current-limit
amplifier (it does not act in this start-up), no blanking and no gate delay.

Usage: forward_closed_loop.py SCENARIO.json [STOP_TIME_S]
Needs numpy and scipy (`pip install numpy scipy`).
"""

import json
import re
import sys
import time

import numpy as np
from scipy.integrate import solve_ivp

PREFIX = {"p": 1e-12, "n": 1e-9, "u": 1e-6, "µ": 1e-6, "m": 1e-3, "k": 1e3, "M": 1e6}


def si(value):
    """A scenario value ("220 uF", "1R25", "10k", 2.5) in SI units."""
    if isinstance(value, (int, float)):
        return float(value)
    s = value.replace(" ", "").replace("Ω", "").replace("mm2", "e-6")
    m = re.fullmatch(r"(\d+)R(\d+)", s)
    if m:
        return float(f"{m.group(1)}.{m.group(2)}")
    m = re.fullmatch(r"([-+0-9.eE]+)([pnuµmkM]?)([A-Za-z]*)", s)
    if not m:
        raise ValueError(f"cannot read {value!r}")
    return float(m.group(1)) * PREFIX.get(m.group(2), 1.0)


def load(path):
    doc = json.load(open(path))
    c, d = doc["converter"], doc["drive"]["controller"]
    vl = d["voltage_loop"]
    pz = vl["compensation"]["poles_zeros"]
    w = lambda f: 2 * np.pi * si(f)
    # Gc(s) = (wI/s)(1 + s/wz1)(1 + s/wz2) / ((1 + s/wp1)(1 + s/wp2)) as an integrator
    # and two lead-lag sections, each state in volts (a well-scaled realisation).
    sections = [(w(z), w(pl)) for z, pl in zip(pz["zeros"], pz["poles"])]
    return dict(
        vin=si(c["input"]["voltage"]),
        np_=si(c["transformer"]["primary_turns"]),
        ns=si(c["transformer"]["secondary_turns"]),
        nr=si(c["reset"]["reset_winding"]["turns"]),
        lm=si(c["transformer"]["magnetising_inductance"]),
        r_sw=si(c["switch"]["r_on"]),
        vf_d=si(c["reset"]["reset_winding"]["diode"]["vf"]),
        r_d=si(c["reset"]["reset_winding"]["diode"]["r_on"]),
        vf_r=si(c["rectifier"]["vf"]),
        r_r=si(c["rectifier"]["r_on"]),
        vf_f=si(c["freewheel"]["vf"]),
        r_f=si(c["freewheel"]["r_on"]),
        l=si(c["output_inductor"]["inductance"]),
        dcr=si(c["output_inductor"]["dcr"]),
        cap=si(c["output_capacitor"]["capacitance"]),
        esr=si(c["output_capacitor"]["esr"]),
        rload=si(c["load"]["resistance"]),
        f=si(d["oscillator"]["frequency"]),
        valley=si(d["oscillator"]["valley"]),
        peak=si(d["oscillator"]["peak"]),
        dmax=float(d["max_duty"]),
        ss=si(d["soft_start"]),
        vref=si(vl["reference"]),
        ref_ss=si(vl["reference_soft_start"]),
        k_div=si(vl["divider_bottom"]) / (si(vl["divider_top"]) + si(vl["divider_bottom"])),
        amp_low=si(vl["amplifier"]["output_low"]),
        amp_high=si(vl["amplifier"]["output_high"]),
        w_i=w(pz["integrator"]),
        sections=sections,
    )


class Converter:
    """x = [i_m, i_L, v_C, compensation states...]; the mode is the switch and the two
    diode conduction flags."""

    def __init__(self, p):
        self.p = p
        self.on = False
        self.reset = False  # reset diode conducting
        self.ccm = False  # freewheel/rectifier carrying the inductor current

    def vout(self, x):
        p = self.p
        return (x[2] + p["esr"] * x[1]) * p["rload"] / (p["rload"] + p["esr"])

    def vref(self, t):
        p = self.p
        return p["vref"] * min(1.0, t / p["ref_ss"]) if p["ref_ss"] > 0 else p["vref"]

    def compensation(self, x, u):
        """Output of the compensation and the derivatives of its states."""
        p = self.p
        v = x[3]
        dz = [p["w_i"] * u]
        for k, (wz, wp) in enumerate(p["sections"]):
            s = x[4 + k]
            dz.append(wp * (v - s))
            v = (wp / wz) * v + (1 - wp / wz) * s
        return v, dz

    def vc(self, x):
        p = self.p
        y, _ = self.compensation(x, 0.0)
        return min(max(p["peak"] - y, p["amp_low"]), p["amp_high"])

    def rhs(self, t, x):
        p = self.p
        i_m, i_l = x[0], x[1]
        n = p["ns"] / p["np_"]
        vo = self.vout(x)
        if self.on:
            v_p = p["vin"] - p["r_sw"] * (i_m + n * max(i_l, 0.0))
            di_m = v_p / p["lm"]
            di_l = (n * v_p - p["vf_r"] - (p["r_r"] + p["dcr"]) * i_l - vo) / p["l"]
        else:
            if self.reset:
                k = p["np_"] / p["nr"]
                v_p = -(p["vin"] + p["vf_d"] + p["r_d"] * i_m * k) * k
                di_m = v_p / p["lm"]
            else:
                di_m = 0.0
            if self.ccm:
                di_l = (-p["vf_f"] - (p["r_f"] + p["dcr"]) * i_l - vo) / p["l"]
            else:
                di_l = 0.0
        dv_c = (i_l - vo / p["rload"]) / p["cap"]
        u = self.vref(t) - p["k_div"] * vo
        y, dz = self.compensation(x, u)
        # Anti-windup: the integrator holds while the output is on a rail and the
        # error pushes it further.
        vc_free = p["peak"] - y
        if (vc_free <= p["amp_low"] and u > 0) or (vc_free >= p["amp_high"] and u < 0):
            dz[0] = 0.0
        return np.array([di_m, di_l, dv_c] + dz)


def simulate(p, stop):
    conv = Converter(p)
    period = 1.0 / p["f"]
    x = np.zeros(4 + len(p["sections"]))
    t = 0.0
    calls = 0
    t90 = None
    opts = dict(method="Radau", rtol=1e-10, atol=1e-12)
    k = 0
    while t < stop - 1e-15:
        edge = k * period
        nxt = min((k + 1) * period, stop)
        dmax = p["dmax"] * min(1.0, edge / p["ss"]) if p["ss"] > 0 else p["dmax"]
        # On interval: until the ramp falls below the control voltage or the clamp.
        conv.on, conv.reset, conv.ccm = dmax > 0, False, True
        if conv.on:
            t_clamp = min(edge + dmax * period, nxt)

            def comparator(tt, xx, edge=edge):
                ramp = p["peak"] - (p["peak"] - p["valley"]) * (tt - edge) / period
                return ramp - conv.vc(xx)

            comparator.terminal, comparator.direction = True, -1
            if comparator(t, x) > 0:
                sol = solve_ivp(conv.rhs, (t, t_clamp), x, events=[comparator], **opts)
                calls += 1
                t, x = sol.t[-1], sol.y[:, -1]
            else:
                t = t  # control already above the ramp: no pulse this period
        # Off interval: reset diode and freewheel until their currents reach zero.
        conv.on = False
        conv.reset = x[0] > 0
        conv.ccm = x[1] > 0
        while t < nxt - 1e-15:
            def reset_done(tt, xx):
                return xx[0]

            def freewheel_done(tt, xx):
                return xx[1]

            reset_done.terminal = freewheel_done.terminal = True
            reset_done.direction = freewheel_done.direction = -1
            events = ([reset_done] if conv.reset else []) + ([freewheel_done] if conv.ccm else [])
            sol = solve_ivp(conv.rhs, (t, nxt), x, events=events or None, **opts)
            calls += 1
            t, x = sol.t[-1], sol.y[:, -1].copy()
            if sol.status == 1:
                if conv.reset and len(sol.t_events[0]) and x[0] <= 1e-12:
                    conv.reset, x[0] = False, 0.0
                if conv.ccm and len(sol.t_events[-1]) and x[1] <= 1e-12:
                    conv.ccm, x[1] = False, 0.0
            else:
                break
        vo = conv.vout(x)
        if t90 is None and vo >= 0.9 * p["vref"] / p["k_div"]:
            t90 = t
        k += 1
    return conv.vout(x), t90, calls


def main():
    path = sys.argv[1]
    p = load(path)
    stop = float(sys.argv[2]) if len(sys.argv) > 2 else si(json.load(open(path))["analysis"]["stop_time"])
    started = time.perf_counter()
    vo, t90, calls = simulate(p, stop)
    wall = time.perf_counter() - started
    print(json.dumps({"stop_time_s": stop, "vout_end_v": vo, "t90_s": t90,
                      "solver_calls": calls, "solve_s": wall}))


if __name__ == "__main__":
    main()
