#!/usr/bin/env python3
"""tests/ref/param_check.py: a scan of parameters against the closed form of the loop.

docs/examples/spread_param.net scans the .param cl (the load capacitor CL = {cl}) and the
instance parameter X1.gbw of an amplifier model (CX = gm/(2 pi gbw) inside the subcircuit).
For this circuit the return ratio at X1.G1 follows from the circuit by hand (nodal analysis;
E1 ideal, the G input draws no current, so nothing else loads the nodes):

  T(s) = gm RX/(1 + s RX CX) * Zl/(RO + Zl) * RG/(RF + RG),   Zl = (RF + RG) || 1/(s CL)
  RX = a0/gm, CX = gm/(2 pi gbw)

(the return ratio of a voltage-controlled source: Bode 1945; the two-pole loop of any
feedback text). For each run this script computes T(0), the unity crossing (scipy brentq
on log|T| over log f) and the phase margin 180 deg + arg T there with numpy, and checks
tbeta's figures; it checks that the runs are every pair of the two .scan lists, the first
card varying slowest, and that a run of tbeta on the same netlist with the parameter values
written into it (re-read from the file) gives the same figures: a parameter scan is the
netlist re-read at each value. Usage: param_check.py TBETA [netlists...] (netlists ignored).
"""
import json
import math
import os
import subprocess
import sys
import tempfile

import numpy as np
from scipy.optimize import brentq

NET = "docs/examples/spread_param.net"
GM, A0, RO, RF, RG = 1e-3, 100e3, 50.0, 10e3, 10e3


def loop_gain(f, cl, gbw):
    s = 2j * np.pi * f
    rx, cx = A0 / GM, GM / (2 * np.pi * gbw)
    zl = 1 / (1 / (RF + RG) + s * cl)
    return GM * rx / (1 + s * rx * cx) * zl / (RO + zl) * RG / (RF + RG)


def figures(cl, gbw):
    t0 = loop_gain(0.0, cl, gbw).real
    fc = 10 ** brentq(lambda lf: math.log(abs(loop_gain(10 ** lf, cl, gbw))), 0, 9, xtol=1e-14, rtol=1e-15)
    pm = 180 + math.degrees(np.angle(loop_gain(fc, cl, gbw)))
    return {"dc.T": t0, "unity_hz": fc, "phase_margin_deg": pm}


def run(tbeta, net):
    out = subprocess.run([tbeta, "spread", net, "--scan", "--json", "--jobs", "2"], capture_output=True, text=True)
    if out.returncode not in (0, 1):
        print("param_check: tbeta spread %s exited %d: %s" % (net, out.returncode, out.stderr))
        sys.exit(1)
    return json.loads(out.stdout)


def main():
    tbeta = sys.argv[1]
    doc = run(tbeta, NET)
    cls = [1e-10 * 10 ** (i / 2) for i in range(7)]  # .scan {cl} log 100p 100n 7
    gbws = [2.5e6, 5e6, 10e6]                       # .scan {X1.gbw} list 2.5meg 5meg 10meg
    runs = doc["runs"]
    bad = 0
    if len(runs) != len(cls) * len(gbws):
        print("param_check: %d runs, want %d" % (len(runs), len(cls) * len(gbws)))
        return 1
    # tolerances: T(0) to rounding; the crossing as tbeta refines it (1e-9 relative, as
    # tests/ref/spread_check.py) and the phase margin to 1e-7 degrees
    tol = {"dc.T": 1e-12, "unity_hz": 1e-9, "phase_margin_deg": 1e-7}
    for i, r in enumerate(runs):
        cl, gbw = cls[i // len(gbws)], gbws[i % len(gbws)]
        vals = r["values"]
        if abs(vals["{cl}"] - cl) > 1e-12 * cl or abs(vals["{X1.gbw}"] - gbw) > 1e-12 * gbw:
            print("param_check: run %d has %r, want cl=%g gbw=%g" % (i, vals, cl, gbw))
            bad += 1
            continue
        want = figures(cl, gbw)
        got = r["loops"]["X1.G1"]
        for name, v in want.items():
            scale = abs(v) if name != "phase_margin_deg" else 1.0
            if got[name] is None or abs(got[name] - v) > tol[name] * scale:
                print("param_check: cl=%g gbw=%g %s: tbeta %r, closed form %r" % (cl, gbw, name, got[name], v))
                bad += 1
    bad += check_reread(tbeta, runs, cls, gbws)
    if bad:
        return 1
    print("param_check: %d runs of the parameter scan match the closed form and the re-read netlist" % len(runs))
    return 0


def check_reread(tbeta, runs, cls, gbws):
    """Three runs against the netlist with the values written in and read afresh."""
    text = open(NET).read()
    bad = 0
    for i in (0, 10, 20):
        cl, gbw = cls[i // len(gbws)], gbws[i % len(gbws)]
        changed = text.replace(".param cl=1n", ".param cl=%.17g" % cl)
        changed = changed.replace("opamp gbw=5meg", "opamp gbw=%.17g" % gbw)
        changed = "\n".join(l for l in changed.split("\n") if not l.startswith(".scan"))
        head, tail = changed.rsplit("\n.end", 1)
        changed = head + "\n.scan RF list 10k\n.end" + tail  # one run at the written values
        with tempfile.NamedTemporaryFile("w", suffix=".net", delete=False) as f:
            f.write(changed)
        try:
            fresh = run(tbeta, f.name)["runs"][0]["loops"]["X1.G1"]
        finally:
            os.unlink(f.name)
        for name, v in fresh.items():
            got = runs[i]["loops"]["X1.G1"][name]
            if got != v:
                print("param_check: run %d %s: scan %r, netlist re-read %r" % (i, name, got, v))
                bad += 1
    return bad


if __name__ == "__main__":
    sys.exit(main())
