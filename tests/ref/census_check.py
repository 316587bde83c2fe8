#!/usr/bin/python3
"""tests/ref/census_check.py: independent check of tbeta's loop census (--all-sources).

Usage:
    /usr/bin/python3 tests/ref/census_check.py TBETA [NETLIST...]

For tests/stab/census_*.net, stab_rhp_open.net and stab_minor_loop.net (and any netlist
given), every controlled source's return ratio comes from the independent dense MNA of
tests/ref/mna_check.py (loop_point: a unit test source of the same kind in place of
k x_c, the others at their gains, numpy/scipy LU; Bode's return ratio), sharing no
code with tbeta. Against `tbeta report --all-sources --json` ("census"):
  - T at DC with its sign, to 1e-9 relative (T(0) < 0 is positive feedback);
  - the largest |T| over DC and the sweep grid, to 1e-6 dB;
  - grouping: sources whose T agrees to 1e-9 at every grid point are one loop; a loop
    no .loop marks is flagged once (one entry not "same loop as"), when |T| reaches 1;
  - the phase margin of each falling unity crossing (scipy brentq on ln|T| in log f)
    to 0.01 deg, and phase_margin_ok against the default 45 deg (common practice);
  - unstable on its own: right-half-plane poles (scipy.linalg.eig of the pencil G + sC)
    of the circuit with the marked source's gain at zero, and with this source's at
    zero too: fewer with both means the local cell is unstable alone.
Prints "census_check: N passed, M failed"; exit 1 when any failed.
"""

import glob
import importlib.util
import json
import math
import os
import subprocess
import sys

import numpy as np
import scipy.linalg
import scipy.optimize

HERE = os.path.dirname(os.path.abspath(__file__))
spec = importlib.util.spec_from_file_location("mna_check", os.path.join(HERE, "mna_check.py"))
mna_check = importlib.util.module_from_spec(spec)
spec.loader.exec_module(mna_check)

TWO_PI = 2.0 * math.pi
PM_MIN = 45.0   # the default phase-margin threshold (common practice)


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


def T_of(mna, name, f):
    return mna_check.loop_point(mna, name, 1j * TWO_PI * f)["T"]


def rhp_count(mna, zero):
    """Right-half-plane finite roots of det(G + sC) with the gains in `zero` at zero."""
    G = mna.assemble(0.0, {n: 0.0 for n in zero}).real
    C = (mna.assemble(1.0, {n: 0.0 for n in zero}) - mna.assemble(0.0, {n: 0.0 for n in zero})).real
    if np.abs(C).max() == 0:
        return 0        # no capacitor or inductor: no finite poles
    w = scipy.linalg.eigvals(-G, C)
    w = w[np.isfinite(w)]
    scale = np.abs(G).max() / np.abs(C).max()
    w = w[np.abs(w) < 1e9 * scale]
    return int(np.sum(w.real > 1e-7 * np.maximum(np.abs(w), 1e-12 * scale)))


def falling_margins(mna, name, freqs):
    """Phase margins (180 + phase of T) at the crossings where |T| falls through 1."""
    f = np.logspace(math.log10(freqs[0]), math.log10(freqs[-1]), 100 * int(math.log10(freqs[-1] / freqs[0]) + 1))
    lm = [math.log(max(abs(T_of(mna, name, x)), 1e-300)) for x in f]
    out = []
    for i in range(len(f) - 1):
        if lm[i] >= 0 > lm[i + 1]:
            x = scipy.optimize.brentq(lambda u: math.log(abs(T_of(mna, name, math.exp(u)))),
                                      math.log(f[i]), math.log(f[i + 1]), xtol=1e-14)
            T = T_of(mna, name, math.exp(x))
            d = math.degrees(math.atan2(T.imag, T.real)) + 180.0
            out.append(math.fmod(d + 540.0, 360.0) - 180.0)
    return out


def tbeta_census(tbeta, fname):
    out = subprocess.run([tbeta, "report", fname, "--all-sources", "--json"], capture_output=True, text=True)
    if out.returncode not in (0, 1):
        raise RuntimeError("%s: tbeta exit %d: %s" % (fname, out.returncode, out.stderr))
    return json.loads(out.stdout)["census"]


def as_complex(v):
    return None if v is None else (complex(v["re"], v["im"]) if isinstance(v, dict) else complex(v))


def check_file(chk, tbeta, fname):
    with open(fname, encoding="utf-8", errors="replace") as handle:
        ckt = mna_check.read_netlist(handle.read())
    mna = mna_check.Mna(ckt)
    freqs = mna_check.ac_grid(ckt.ac)
    name = os.path.basename(fname)
    census = {e["source"].lower(): e for e in tbeta_census(tbeta, fname)}
    marked = [l.lower() for l in ckt.loops]
    curves = {}
    for src, e in census.items():
        T0 = T_of(mna, src, 0.0)     # None: infinite (the source's gain at zero is singular)
        got = as_complex(e["T_dc"])
        chk.expect((got is None and T0 is None) or
                   (got is not None and T0 is not None and abs(got - T0) <= 1e-9 * abs(T0) + 1e-15),
                   "%s: %s T(0) %s, reference %s" % (name, src, got, T0))
        curve = np.array([complex("nan") if t is None else t
                          for t in [T0] + [T_of(mna, src, f) for f in freqs]])
        curves[src] = curve
        if np.all(np.isnan(curve)):
            continue
        mx = 20 * math.log10(max(np.nanmax(np.abs(curve)), 1e-15))
        chk.expect(e["max_T_db"] is None or abs(e["max_T_db"] - mx) <= 1e-6,
                   "%s: %s max |T| %s dB, reference %.9g" % (name, src, e["max_T_db"], mx))
    # grouping: the loops no .loop marks, each flagged once when |T| reaches 1
    groups = []
    for src in census:
        for g in groups:
            ref = curves[g[0]]
            same = np.abs(curves[src] - ref) <= 1e-9 * np.abs(ref) + 1e-12
            if np.all(same | (np.isnan(curves[src]) & np.isnan(ref))):
                g.append(src)
                break
        else:
            groups.append([src])
    for g in groups:
        if any(s in marked for s in g):
            continue
        reaches = np.nanmax(np.abs(curves[g[0]])) >= 1.0 or np.any(np.isnan(curves[g[0]]))
        heads = [s for s in g if census[s]["same_loop_as"] is None]
        flagged = [s for s in g if census[s]["flagged"]]
        if reaches:
            chk.expect(len(heads) == 1 and flagged == heads,
                       "%s: local loop %s: entries not 'same loop as' %s, flagged %s" % (name, g, heads, flagged))
            margins = falling_margins(mna, g[0], freqs)
            head = census[heads[0]] if heads else None
            if head is not None and margins:
                chk.expect(head["phase_margin_deg"] is not None and
                           abs(head["phase_margin_deg"] - min(margins)) <= 0.01,
                           "%s: %s worst PM %s, reference %.6g" % (name, heads[0], head["phase_margin_deg"],
                                                                  min(margins)))
                chk.expect(head["phase_margin_ok"] == (min(margins) >= PM_MIN),
                           "%s: %s phase_margin_ok %s" % (name, heads[0], head["phase_margin_ok"]))
    # local cells unstable on their own
    for loop in marked:
        p = rhp_count(mna, [loop])
        for src, e in census.items():
            if src in marked or e["same_loop_as"] is not None and e["same_loop_as"].lower() in marked:
                continue
            alone = p > 0 and rhp_count(mna, [loop, src]) < p
            chk.expect(e["unstable_alone"] == alone and (not alone or e["relies_on"].lower() == loop),
                       "%s: %s unstable_alone %s, reference %s (P = %d)" % (name, src, e["unstable_alone"],
                                                                          alone, p))
    print("ok %s: %d sources, %d loops" % (name, len(census), len(groups)))


def main(argv):
    if len(argv) < 1:
        print("usage: census_check.py TBETA [NETLIST...]", file=sys.stderr)
        return 2
    tbeta = argv[0]
    stab = os.path.join(HERE, "..", "stab")
    files = sorted(glob.glob(os.path.join(stab, "census_*.net"))) + \
        [os.path.join(stab, "stab_rhp_open.net"), os.path.join(stab, "stab_minor_loop.net")] + list(argv[1:])
    chk = Checks()
    for fname in files:
        try:
            check_file(chk, tbeta, fname)
        except (mna_check.NetlistError, RuntimeError) as exc:
            chk.expect(False, "%s: %s" % (fname, exc))
    print("census_check: %d passed, %d failed" % (chk.passed, chk.failed))
    return 1 if chk.failed else 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
