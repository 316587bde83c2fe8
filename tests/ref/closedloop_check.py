#!/usr/bin/python3
"""tests/ref/closedloop_check.py: independent check of tbeta's closed-loop figures.

Usage:
    /usr/bin/python3 tests/ref/closedloop_check.py TBETA [NETLIST...]

For every netlist with .io (the arguments, tests/stab/*.net and tests/fb/*.net),
the closed-loop gain A(jw) = c' M(jw)^-1 b comes from the independent dense MNA of
tests/ref/mna_check.py (its own reader and stamps, numpy/scipy LU), sharing no
code with tbeta. On that function:
  - the reference gain: A(0) when it is not zero; else (AC-coupled) the largest
    |A| (scipy.optimize.minimize_scalar on a fine log grid's best bracket);
  - the -3 dB edges: scipy.optimize.brentq on ln|A| - ln(|A_ref|/sqrt 2) in log f,
    bracketed on a grid of 100 points per decade over the sweep and six decades
    beyond it, with the sweep's own frequencies added (the high edge: the lowest above the reference; the low edge of an
    AC-coupled response: the highest below midband);
  - the peaking: the largest |A| over the sweep against |A_ref| (minimize_scalar).
Compared with `tbeta report --json` ("closed_loop"): edges to 1e-6 relative (the
issue asks 0.05 %), peaking to 0.01 dB, the midband gain to 1e-6.
Closed forms for two of the netlists (second-order closed loop, common practice:
peaking -20 log10(2 z sqrt(1 - z^2)) at fn sqrt(1 - 2 z^2), bandwidth
fn sqrt(1 - 2 z^2 + sqrt(4 z^4 - 4 z^2 + 2))) are checked as well.
Prints "closedloop_check: N passed, M failed"; exit 1 when any failed.
"""

import glob
import importlib.util
import json
import math
import os
import subprocess
import sys

import numpy as np
import scipy.optimize

HERE = os.path.dirname(os.path.abspath(__file__))
spec = importlib.util.spec_from_file_location("mna_check", os.path.join(HERE, "mna_check.py"))
mna_check = importlib.util.module_from_spec(spec)
spec.loader.exec_module(mna_check)

EDGE_TOL = 1e-6    # the issue asks 0.05 %; root finding on both sides agrees far closer
PEAK_DB_TOL = 0.01
EXT_DECADES = 6
TWO_PI = 2.0 * math.pi


class Checks:
    def __init__(self):
        self.passed = 0
        self.failed = 0

    def expect(self, ok, what):
        if ok:
            self.passed += 1
        else:
            self.failed += 1
            print("FAIL %s" % what)


def close(got, want, rel):
    return got is not None and want is not None and abs(got - want) <= rel * abs(want)


class Response:
    """A(jw) of a netlist by dense solves."""

    def __init__(self, ckt):
        self.mna = mna_check.Mna(ckt)
        self.b = self.mna.excitation()
        self.c = self.mna.output()

    def A(self, f):
        x = mna_check.Dense(self.mna.assemble(1j * TWO_PI * f)).solve(self.b)
        return None if x is None else complex(self.c @ x)

    def lnabs(self, f):
        a = self.A(f)
        return -700.0 if a is None or a == 0 else math.log(abs(a))


def peak_between(resp, f_lo, f_hi):
    """The largest |A| between f_lo and f_hi (log f): (f, |A|)."""
    r = scipy.optimize.minimize_scalar(lambda x: -resp.lnabs(math.exp(x)),
                                       bounds=(math.log(f_lo), math.log(f_hi)), method="bounded",
                                       options={"xatol": 1e-12})
    return math.exp(r.x), math.exp(-r.fun)


def edge_root(resp, level, f_lo, f_hi):
    return math.exp(scipy.optimize.brentq(lambda x: resp.lnabs(math.exp(x)) - level,
                                          math.log(f_lo), math.log(f_hi), xtol=1e-14, rtol=1e-14))


def fine_grid(f_lo, f_hi):
    n = max(2, int(math.ceil(100 * math.log10(f_hi / f_lo))) + 1)
    return np.logspace(math.log10(f_lo), math.log10(f_hi), n)


def reference(resp, freqs):
    """The reference figures: ac_coupled, A_ref, low/high edge, peak (dB)."""
    out = {}
    # the sweep's own frequencies too: a resonance narrower than the 100-per-decade spacing
    # that lies on a sweep frequency (tests/stab/tank_on_grid_*.net) is seen there
    sweep = np.union1d(fine_grid(freqs[0], freqs[-1]), freqs)
    mags = np.array([resp.lnabs(f) for f in sweep])
    a0 = resp.A(0.0) if mna_check.Dense(resp.mna.assemble(0.0)).solve(resp.b) is not None else None
    best = int(np.argmax(mags))
    out["ac_coupled"] = a0 is not None and abs(a0) <= 1e-9 * math.exp(mags[best])
    lo_i, hi_i = max(best - 1, 0), min(best + 1, len(sweep) - 1)
    f_pk, a_pk = peak_between(resp, sweep[lo_i], sweep[hi_i])
    if out["ac_coupled"]:
        out["A_ref"] = a_pk
        ref_f = f_pk
    else:
        out["A_ref"] = abs(a0) if a0 is not None else abs(resp.A(freqs[0]))
        ref_f = 0.0
        out["peak_db"] = 20 * math.log10(a_pk / out["A_ref"]) if a_pk > out["A_ref"] * (1 + 1e-9) else None
        if out["peak_db"] is not None and out["peak_db"] <= 0.001:
            out["peak_db"] = None
    level = math.log(out["A_ref"]) - 0.5 * math.log(2.0)
    wide = np.union1d(fine_grid(freqs[0] * 10 ** -EXT_DECADES, freqs[-1] * 10 ** EXT_DECADES), freqs)
    lv = np.array([resp.lnabs(f) for f in wide]) - level
    out["high"] = None
    for i in range(len(wide) - 1):
        if wide[i + 1] > ref_f and lv[i] >= 0 > lv[i + 1] and (ref_f == 0 or wide[i] >= ref_f * 0.999):
            out["high"] = edge_root(resp, level, wide[i], wide[i + 1])
            break
    out["low"] = None
    if out["ac_coupled"]:
        for i in range(len(wide) - 2, -1, -1):
            if wide[i] < ref_f and lv[i] < 0 <= lv[i + 1]:
                out["low"] = edge_root(resp, level, wide[i], wide[i + 1])
                break
    return out


def tbeta_json(tbeta, fname):
    out = subprocess.run([tbeta, "report", fname, "--json"], capture_output=True, text=True)
    if out.returncode not in (0, 1):
        raise RuntimeError("%s: tbeta exit %d: %s" % (fname, out.returncode, out.stderr))
    return json.loads(out.stdout)


def magnitude(value):
    if value is None:
        return None
    if isinstance(value, dict):
        return abs(complex(value["re"], value["im"]))
    return abs(value)


def check_file(chk, tbeta, fname):
    with open(fname, encoding="utf-8", errors="replace") as handle:
        # directives that ask for figures but do not change the circuit are outside the
        # reference reader's subset: drop them
        text = "\n".join(line for line in handle.read().split("\n")
                         if not line.lower().lstrip().startswith((".break", ".zport", ".ideal", ".expect",
                                                                  ".margins")))
        ckt = mna_check.read_netlist(text)
    if ckt.io is None:
        return
    resp = Response(ckt)
    freqs = mna_check.ac_grid(ckt.ac)
    ref = reference(resp, freqs)
    got = tbeta_json(tbeta, fname)["closed_loop"]
    name = os.path.basename(fname)
    chk.expect(got["ac_coupled"] == ref["ac_coupled"], "%s: ac_coupled %s, reference %s"
               % (name, got["ac_coupled"], ref["ac_coupled"]))
    chk.expect(close(magnitude(got["A_ref"]), ref["A_ref"], 1e-6), "%s: |A_ref| %s, reference %.12g"
               % (name, magnitude(got["A_ref"]), ref["A_ref"]))
    for key, want in (("high_edge_hz", ref["high"]), ("low_edge_hz", ref["low"])):
        ok = (got[key] is None and want is None) or close(got[key], want, EDGE_TOL)
        chk.expect(ok, "%s: %s %s, reference %s" % (name, key, got[key], want))
    if not ref["ac_coupled"]:
        want = ref["peak_db"]
        ok = (got["peak_db"] is None and want is None) or (
            got["peak_db"] is not None and want is not None and abs(got["peak_db"] - want) <= PEAK_DB_TOL)
        chk.expect(ok, "%s: peak_db %s, reference %s" % (name, got["peak_db"], want))
    print("ok %s: A_ref %.6g, edges %s / %s" % (name, ref["A_ref"], ref["low"], ref["high"]))


def closed_forms(chk, tbeta):
    """Second-order closed loop (common practice): tests/stab/stab_twopole.net, whose
    T = 1e4/((1 + s/(2 pi 100))(1 + s/(2 pi 1e6))) gives A = T/(1 + T) exactly (A_inf = 1,
    A0 = 0): wn^2 = (1 + 1e4) w1 w2, 2 z wn = w1 + w2."""
    w1, w2 = TWO_PI * 100, TWO_PI * 1e6
    wn = math.sqrt((1 + 1e4) * w1 * w2)
    z = (w1 + w2) / (2 * wn)
    peak = -20 * math.log10(2 * z * math.sqrt(1 - z * z)) + 20 * math.log10(1 + 1e-4)
    band = wn / TWO_PI * math.sqrt(1 - 2 * z * z + math.sqrt(4 * z ** 4 - 4 * z * z + 2))
    got = tbeta_json(tbeta, os.path.join(HERE, "..", "stab", "stab_twopole.net"))["closed_loop"]
    chk.expect(got["peak_db"] is not None and abs(got["peak_db"] - peak) <= PEAK_DB_TOL,
               "stab_twopole.net: peaking %s dB, closed form %.6g" % (got["peak_db"], peak))
    # the -3 dB level is |A(0)|/sqrt 2 with A(0) = 1e4/(1 + 1e4): the closed form's band edge
    # is for the level 1/sqrt 2 of the normalized response, the same thing
    chk.expect(close(got["high_edge_hz"], band, EDGE_TOL),
               "stab_twopole.net: -3 dB %s Hz, closed form %.8g" % (got["high_edge_hz"], band))


def main(argv):
    if len(argv) < 1:
        print("usage: closedloop_check.py TBETA [NETLIST...]", file=sys.stderr)
        return 2
    tbeta = argv[0]
    files = list(argv[1:]) + sorted(glob.glob(os.path.join(HERE, "..", "stab", "*.net"))) + \
        sorted(glob.glob(os.path.join(HERE, "..", "fb", "*.net")))
    chk = Checks()
    for fname in files:
        try:
            check_file(chk, tbeta, fname)
        except (mna_check.NetlistError, RuntimeError) as exc:
            chk.expect(False, "%s: %s" % (fname, exc))
    closed_forms(chk, tbeta)
    print("closedloop_check: %d passed, %d failed" % (chk.passed, chk.failed))
    return 1 if chk.failed else 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
