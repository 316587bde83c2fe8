#!/usr/bin/env python3
"""tests/ref/spread_check.py: the corners of tbeta spread against a brute-force enumeration.

For tests/spread/corners_twostage.net (two real poles, loop at G1, unity-gain follower) this
script enumerates every combination of the .spread extremes itself (itertools.product),
computes each run's figures from the closed form of the loop gain with numpy/scipy:

  T(s) = gm1 RS1/(1 + s RS1 CS1) * gm2 RS2/(1 + s RS2 CS2)   (return ratio, Bode 1945)
  A(0) = T0/(1 + T0)                                          (Black 1934; A_inf = 1, A0 = 0)
  unity: |T(j 2 pi f)| = 1 by scipy.optimize.brentq on log f
  phase margin = 180 - atan(w RS1 CS1) - atan(w RS2 CS2) in degrees there

and checks that tbeta ran exactly those corners (and the nominal run) with the same figures,
and that its worst cases are the enumeration's. Then the Monte Carlo statistics of the demo
docs/examples/spread_buffer.net against numpy from its own runs, and its yield interval
against scipy's Wilson interval. Usage: spread_check.py TBETA [netlists...]
(the netlists are ignored).
"""
import itertools
import json
import math
import subprocess
import sys

import numpy as np
from scipy.optimize import brentq

NET = "tests/spread/corners_twostage.net"
GM1 = 1e-3
RS1, RS2, CS1, CS2, G2 = 1e6, 1e3, 1.5e-9, 150e-12, 10e-3


def figures(rs1, cs1, g2, cs2):
    rs2 = RS2 * rs1 / RS1  # one draw moves the group res
    t1, t2 = rs1 * cs1, rs2 * cs2
    t0 = GM1 * rs1 * g2 * rs2

    def log_mag(logf):
        w = 2 * math.pi * 10 ** logf
        return math.log(abs(t0 / ((1 + 1j * w * t1) * (1 + 1j * w * t2))))

    fc = 10 ** brentq(log_mag, -3, 12, xtol=1e-15, rtol=1e-15)
    w = 2 * math.pi * fc
    pm = 180 - math.degrees(math.atan(w * t1)) - math.degrees(math.atan(w * t2))
    return {"dc.T": t0, "dc.A": t0 / (1 + t0), "unity_hz": fc, "phase_margin_deg": pm}


def key(vals):
    return tuple(float("%.12g" % v) for v in vals)


def check_statistics(tbeta):
    """Monte Carlo statistics and yield of the demo against numpy and scipy from its own runs:
    mean, sample sigma (ddof=1), min, max, percentiles (numpy's linear method = Hyndman and
    Fan's type 7), each part's correlation with each figure (numpy.corrcoef), the yield and
    its 95 % Wilson interval (scipy.stats.binomtest)."""
    out = subprocess.run([tbeta, "spread", "docs/examples/spread_buffer.net", "--samples", "120", "--seed", "9",
                          "--json", "--jobs", "2"], capture_output=True, text=True)
    return statistics_mismatches(json.loads(out.stdout), "spread_check")


def statistics_mismatches(doc, who):
    """The checks of check_statistics on one Monte Carlo document (tbeta spread --json, or the
    spread.monte_carlo object of tbeta report --json); also each figure's worst case against
    numpy's argmin/argmax where the figure has a worse direction. Returns the mismatches."""
    from scipy.stats import binomtest
    bad = 0
    for name, st in doc["statistics"]["G1"].items():
        if name == "desensitivity":
            continue
        x = np.array([r["loops"]["G1"][name] for r in doc["runs"] if r["loops"]["G1"][name] is not None])
        want = {"mean": np.mean(x), "sigma": np.std(x, ddof=1), "min": np.min(x), "max": np.max(x),
                "p1": np.percentile(x, 1), "p5": np.percentile(x, 5), "p50": np.percentile(x, 50),
                "p95": np.percentile(x, 95), "p99": np.percentile(x, 99)}
        if st["present"] != len(x):
            bad += 1
        # the worst case: lower is worse for the loop gain, the margins and the delay margin,
        # the larger magnitude for the gain error; a gain or a frequency has none (common practice)
        ends = {"dc.T": -1, "phase_margin_deg": -1, "gain_margin_up_db": -1, "delay_margin_s": -1,
                "dc.gain_error_pct": -1 if abs(np.min(x)) > abs(np.max(x)) else 1}
        rows = [i for i, r in enumerate(doc["runs"]) if r["loops"]["G1"][name] is not None]
        end = ends.get(name, 0)
        want_worst = None if not end else (np.min(x) if end < 0 else np.max(x))
        want_run = None if not end else rows[int(np.argmin(x) if end < 0 else np.argmax(x))]
        if st.get("worst") != want_worst or st.get("worst_run") != want_run:
            print("%s: worst of %s: tbeta %r (run %r), numpy %r (run %r)"
                  % (who, name, st.get("worst"), st.get("worst_run"), want_worst, want_run))
            bad += 1
        for k, v in want.items():
            if abs(st[k] - v) > 1e-12 * max(abs(v), np.max(np.abs(x))):
                print("%s: %s %s: tbeta %r, numpy %r" % (who, name, k, st[k], v))
                bad += 1
        # Pearson's r of each drawn part with the figure (numpy.corrcoef), over the runs that have it
        for dim, r in st["correlation"].items():
            rows = [q for q in doc["runs"] if q["loops"]["G1"][name] is not None]
            a = np.array([q["values"][dim] for q in rows])
            b = np.array([q["loops"]["G1"][name] for q in rows])
            want_r = np.corrcoef(a, b)[0, 1] if np.std(a) > 0 and np.std(b) > 0 else None
            if (r is None) != (want_r is None or not np.isfinite(want_r)) or \
                    (r is not None and abs(r - want_r) > 1e-9):
                print("%s: correlation of %s with %s: tbeta %r, numpy %r" % (who, name, dim, r, want_r))
                bad += 1
    passed = sum(r["status"] == "pass" for r in doc["runs"])
    analysed = sum(r["status"] != "not analysed" for r in doc["runs"])
    ci = binomtest(passed, analysed).proportion_ci(confidence_level=0.95, method="wilson")
    if abs(doc["yield"] - passed / analysed) > 1e-15 or abs(doc["yield_interval_95"][0] - ci.low) > 1e-12 \
            or abs(doc["yield_interval_95"][1] - ci.high) > 1e-12:
        print("%s: yield %r %r, want %r [%r, %r]" % (who, doc["yield"], doc["yield_interval_95"],
                                                   passed / analysed, ci.low, ci.high))
        bad += 1
    print("%s: Monte Carlo statistics and yield of %d samples against numpy and scipy, %d mismatches"
          % (who, len(doc["runs"]), bad))
    return bad


def main():
    tbeta = sys.argv[1]
    out = subprocess.run([tbeta, "spread", NET, "--corners", "--json", "--jobs", "2"],
                         capture_output=True, text=True)
    if out.returncode not in (0, 1):
        print("spread_check: tbeta failed:", out.stderr)
        return 1
    doc = json.loads(out.stdout)
    runs = doc["runs"]
    # the enumeration: extremes flat +-5 %, gauss +-3 sigma (2 % -> 6 %), flat +-10 %, pick 5m/20m
    ends = [(RS1 * 0.95, RS1 * 1.05), (CS1 * 0.94, CS1 * 1.06), (5e-3, 20e-3), (CS2 * 0.9, CS2 * 1.1)]
    want = {key(c): c for c in itertools.product(*ends)}
    want[key((RS1, CS1, G2, CS2))] = (RS1, CS1, G2, CS2)
    got = {}
    for r in runs:
        v = r["values"]
        got[key((v["res"], v["CS1"], v["G2"], v["CS2"]))] = r
    bad = 0
    if set(got) != set(want) or len(runs) != len(want):
        print("spread_check: tbeta ran %d runs, the enumeration has %d; differing: %s"
              % (len(runs), len(want), sorted(set(got) ^ set(want))[:4]))
        return 1
    tol = {"dc.T": 1e-9, "dc.A": 1e-12, "unity_hz": 1e-7, "phase_margin_deg": 1e-5}
    worst = {name: [] for name in tol}
    for k, vals in want.items():
        ref = figures(*vals)
        loop = got[k]["loops"]["G1"]
        for name, t in tol.items():
            x = loop[name]
            scale = abs(ref[name]) if name != "phase_margin_deg" else 1.0
            if x is None or abs(x - ref[name]) > t * scale:
                print("spread_check: %s at %s: tbeta %r, closed form %r" % (name, k, x, ref[name]))
                bad += 1
            worst[name].append(ref[name])
    stats = doc["statistics"]["G1"]
    for name in tol:
        lo, hi = np.min(worst[name]), np.max(worst[name])
        scale = max(abs(lo), abs(hi)) if name != "phase_margin_deg" else 1.0
        if abs(stats[name]["min"] - lo) > tol[name] * scale or abs(stats[name]["max"] - hi) > tol[name] * scale:
            print("spread_check: worst cases of %s: tbeta %r..%r, enumeration %r..%r"
                  % (name, stats[name]["min"], stats[name]["max"], lo, hi))
            bad += 1
    print("spread_check: %d corners and the nominal run against the enumeration, %d mismatches"
          % (len(want) - 1, bad))
    bad += check_statistics(tbeta)
    return 1 if bad else 0


if __name__ == "__main__":
    sys.exit(main())
