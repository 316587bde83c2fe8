#!/usr/bin/python3
"""tests/ref/stability_check.py: independent check of tbeta's stability figures.

Usage:
    /usr/bin/python3 tests/ref/stability_check.py TBETA [NETLIST...]

Two independent routes, sharing no code with tbeta:

1. Loops with a known transfer function (tests/stab/*.net, T(s) written out in
   ANALYTIC below from each netlist's element values). The same T(s) is given
   to scipy.signal (freqs for T(jw), brentq for the roots, minimize_scalar for
   the vector margin); the unity and phase crossings, phase, gain, delay and
   vector margins are compared with tbeta's JSON to 0.01 deg and 1e-4
   relative, the closed-loop poles with numpy.roots(den + num) to 1e-6, the
   Nyquist count with Z - P from numpy.roots, and the verdict with the one
   each netlist was built to have.

2. Every netlist (the arguments and tests/stab/*.net): the dense pencil
   G + sC of the independent MNA of tests/ref/mna_check.py goes to
   scipy.linalg.eig; every closed-loop pole tbeta lists must be one of its
   finite eigenvalues (1e-6 relative), the right-half-plane counts must agree
   (closed loop, and open loop with the marked source at zero), and at every
   crossing tbeta reports, T from mna_check's test-source solve must have
   |T| = 1 (unity) or phase -180 mod 360 (phase) and the stated margin.

Prints one line per check group and a closing line
"stability_check: N passed, M failed"; exit status 1 when any check failed.
"""

import glob
import importlib.util
import json
import math
import os
import re
import subprocess
import sys

import numpy as np
import scipy.linalg
import scipy.optimize
import scipy.signal

HERE = os.path.dirname(os.path.abspath(__file__))
STAB = os.path.join(HERE, "..", "stab")
spec = importlib.util.spec_from_file_location("mna_check", os.path.join(HERE, "mna_check.py"))
mna_check = importlib.util.module_from_spec(spec)
spec.loader.exec_module(mna_check)

DEG_TOL = 0.01     # degrees (the agreement for phases)
REL_TOL = 1e-4     # relative, for frequencies, dB figures and delays
POLE_TOL = 1e-6    # relative, poles against an independent eigenvalue solver
TWO_PI = 2.0 * math.pi


def poly(*factors):
    out = np.array([1.0])
    for f in factors:
        out = np.polymul(out, f)
    return out


def pole(w):
    """1 + s/w as a polynomial in s."""
    return np.array([1.0 / w, 1.0])


# T(s) = num/den in s (rad/s), written from each netlist's element values,
# with the verdict and Nyquist count the circuit was built to have.
P1K = TWO_PI * 1e3
ANALYTIC = {
    # references.md section 4, check 4b
    "stab_twopole.net": (np.array([1e4]), poly(pole(TWO_PI * 100), pole(TWO_PI * 1e6)), "stable", 0),
    # references.md section 4, check 4c (T0 = 2 and T0 = 10), section 8 check 8c
    "stab_threepole.net": (np.array([2.0]), poly(pole(P1K), pole(P1K), pole(P1K)), "stable", 0),
    "stab_threepole_unstable.net": (np.array([10.0]), poly(pole(P1K), pole(P1K), pole(P1K)),
                                    "unstable", 2),
    "stab_conditional.net": (3e6 * poly(pole(TWO_PI * 1e3), pole(TWO_PI * 1e3)),
                             poly(pole(TWO_PI * 10), pole(TWO_PI * 10), pole(TWO_PI * 10),
                                  pole(TWO_PI * 1e6), pole(TWO_PI * 1e6)), "stable", 0),
    # T = gm1 / (sC - (gn - 1/R)), an open-loop pole at +1e6 rad/s
    "stab_rhp_open.net": (np.array([5e-3]), np.array([1e-9, -1e-3]), "stable", -1),
}


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


def tbeta_json(tbeta, fname):
    out = subprocess.run([tbeta, "report", fname, "--json"], capture_output=True, text=True)
    if out.returncode not in (0, 1):
        raise RuntimeError("%s: tbeta exit %d: %s" % (fname, out.returncode, out.stderr))
    return json.loads(out.stdout)


def wrap180(d):
    d = math.fmod(d, 360.0)
    if d <= -180.0:
        d += 360.0
    elif d > 180.0:
        d -= 360.0
    return d


def close(got, want, rel, floor=0.0):
    return got is not None and abs(got - want) <= rel * abs(want) + floor


# ------------------------------------------------ route 1: scipy.signal --

def T_of(num, den, f):
    _, h = scipy.signal.freqs(num, den, worN=[TWO_PI * f])
    return complex(h[0])


def reference_crossings(num, den, f_lo, f_hi):
    """Unity and phase crossings of T(j 2 pi f) on [f_lo, f_hi], by brentq."""
    f = np.logspace(math.log10(f_lo), math.log10(f_hi), 4001)
    _, h = scipy.signal.freqs(num, den, worN=TWO_PI * f)
    T0 = num[-1] / den[-1]
    ph = np.unwrap(np.concatenate(([math.atan2(0.0, T0)], np.angle(h)))) * 180 / math.pi
    ph = ph[1:]
    unity, phase = [], []
    for i in range(len(f) - 1):
        a, b = math.log(f[i]), math.log(f[i + 1])
        la, lb = math.log(abs(h[i])), math.log(abs(h[i + 1]))
        if (la < 0) != (lb < 0):
            x = scipy.optimize.brentq(lambda x: math.log(abs(T_of(num, den, math.exp(x)))), a, b,
                                      xtol=1e-14)
            fc = math.exp(x)
            deg = ph[i] + wrap180(math.degrees(np.angle(T_of(num, den, fc))) - ph[i])
            unity.append((fc, wrap180(deg + 180.0)))
        lo, hi = min(ph[i], ph[i + 1]), max(ph[i], ph[i + 1])
        k = math.ceil((lo - 180.0) / 360.0)
        while 180.0 + 360.0 * k <= hi:
            level = 180.0 + 360.0 * k
            if (ph[i] < level) != (ph[i + 1] < level):
                def g(x, base=ph[i], level=level):
                    d = math.degrees(np.angle(T_of(num, den, math.exp(x))))
                    return base + wrap180(d - base) - level
                x = scipy.optimize.brentq(g, a, b, xtol=1e-14)
                f180 = math.exp(x)
                phase.append((f180, -20.0 * math.log10(abs(T_of(num, den, f180)))))
            k += 1
    return unity, phase


def reference_vector_margin(num, den, f_lo, f_hi):
    f = np.logspace(math.log10(f_lo), math.log10(f_hi), 4001)
    _, h = scipy.signal.freqs(num, den, worN=TWO_PI * f)
    i = int(np.argmin(np.abs(1 + h)))
    lo, hi = math.log(f[max(i - 1, 0)]), math.log(f[min(i + 1, len(f) - 1)])
    res = scipy.optimize.minimize_scalar(lambda x: abs(1 + T_of(num, den, math.exp(x))),
                                         bounds=(lo, hi), method="bounded",
                                         options={"xatol": 1e-12})
    return min(float(res.fun), float(np.abs(1 + h[i])))


def rhp(roots):
    return sum(1 for r in roots if r.real > 1e-9 * abs(r))


def check_analytic(chk, tbeta, fname):
    num, den, verdict, n_enc = ANALYTIC[os.path.basename(fname)]
    doc = tbeta_json(tbeta, fname)
    loop = doc["loops"][0]
    sweep = doc["sweep"]
    where = os.path.basename(fname)
    unity, phase = reference_crossings(num, den, sweep["fstart_hz"], sweep["fstop_hz"])
    got_u = loop["crossings"]["unity"]
    got_p = loop["crossings"]["phase"]
    chk.expect(len(got_u) == len(unity), "%s: %d unity crossings, scipy %d" % (where, len(got_u), len(unity)))
    chk.expect(len(got_p) == len(phase), "%s: %d phase crossings, scipy %d" % (where, len(got_p), len(phase)))
    for got, (fc, pm) in zip(got_u, unity):
        chk.expect(close(got["hz"], fc, REL_TOL), "%s: unity at %r Hz, scipy %r" % (where, got["hz"], fc))
        chk.expect(close(got["phase_margin_deg"], pm, 0, DEG_TOL),
                   "%s: PM %r, scipy %r" % (where, got["phase_margin_deg"], pm))
        if pm > 0:
            tau = math.radians(pm) / (TWO_PI * fc)
            chk.expect(close(got["delay_margin_s"], tau, REL_TOL),
                       "%s: delay margin %r, scipy %r" % (where, got["delay_margin_s"], tau))
    for got, (f180, gm) in zip(got_p, phase):
        chk.expect(close(got["hz"], f180, REL_TOL), "%s: phase crossing at %r Hz, scipy %r" % (where, got["hz"], f180))
        chk.expect(close(got["gain_margin_db"], gm, REL_TOL, 1e-9),
                   "%s: GM %r dB, scipy %r" % (where, got["gain_margin_db"], gm))
    if unity:
        worst = min((pm for _, pm in unity), key=abs)
        chk.expect(close(loop["phase_margin_deg"], worst, 0, DEG_TOL),
                   "%s: worst PM %r, scipy %r" % (where, loop["phase_margin_deg"], worst))
    if phase:
        gm = min((g for _, g in phase), key=abs)
        chk.expect(close(loop["gain_margin_db"], gm, REL_TOL), "%s: headline GM %r, scipy %r" % (where, loop["gain_margin_db"], gm))
    else:
        chk.expect(loop["gain_margin_db"] is None, "%s: gain margin should be null" % where)
    vm = reference_vector_margin(num, den, sweep["fstart_hz"], sweep["fstop_hz"])
    chk.expect(close(loop["vector_margin"], vm, REL_TOL), "%s: vector margin %r, scipy %r" % (where, loop["vector_margin"], vm))
    # poles: roots of den + num (closed loop) and den (open loop); Z = N + P
    cl = np.roots(np.polyadd(den, num))
    ol = np.roots(den)
    poles = [complex(p["re"], p["im"]) for p in loop["poles"]["least_damped"]]
    chk.expect(len(poles) == len(cl), "%s: %d closed-loop poles, numpy %d" % (where, len(poles), len(cl)))
    for p in poles:
        d = min(abs(p - r) for r in cl)
        chk.expect(d <= POLE_TOL * abs(p), "%s: pole %r not among numpy.roots" % (where, p))
    chk.expect(loop["poles"]["closed_loop_rhp"] == rhp(cl), "%s: closed-loop RHP count" % where)
    chk.expect(loop["poles"]["open_loop_rhp"] == rhp(ol), "%s: open-loop RHP count" % where)
    chk.expect(rhp(cl) - rhp(ol) == n_enc, "%s: the netlist's stated N disagrees with numpy" % where)
    chk.expect(loop["nyquist_encirclements"] == n_enc,
               "%s: N = %r, expected %d" % (where, loop["nyquist_encirclements"], n_enc))
    chk.expect(loop["verdict"] == verdict, "%s: verdict %r, expected %r" % (where, loop["verdict"], verdict))
    check_dominant(chk, where, loop, cl)
    check_step(chk, tbeta, fname, num, den, doc, verdict)
    print("ok %s: %d unity, %d phase crossings, %d poles" % (where, len(unity), len(phase), len(cl)))


def check_dominant(chk, where, loop, cl):
    """zeta, Q, peaking and overshoot of the least damped pair from the numpy poles,
    by the second-order formulas of references.md section 4."""
    pairs = [r for r in cl if r.imag > 1e-9 * abs(r) and r.real < 0]
    if not pairs:
        chk.expect(loop["dominant_pair"] is None, "%s: no complex pair, yet one reported" % where)
        return
    r = min(pairs, key=lambda r: -r.real / abs(r))
    zeta = -r.real / abs(r)
    dom = loop["dominant_pair"]
    chk.expect(close(dom["zeta"], zeta, 1e-6), "%s: zeta %r, numpy %r" % (where, dom["zeta"], zeta))
    chk.expect(close(dom["q"], 1 / (2 * zeta), 1e-6), "%s: Q" % where)
    os_pct = 100 * math.exp(-math.pi * zeta / math.sqrt(1 - zeta * zeta))
    chk.expect(close(dom["overshoot_pct"], os_pct, 1e-6), "%s: overshoot" % where)
    if zeta < math.sqrt(0.5):
        mp = -20 * math.log10(2 * zeta * math.sqrt(1 - zeta * zeta))
        chk.expect(close(dom["peaking_db"], mp, 1e-6), "%s: peaking" % where)


def step_figures(t, y, final):
    """Overshoot, 10-90 % rise, 2 % settling of samples, by their definitions."""
    z = y / final
    overshoot = max(0.0, 100 * (z.max() - 1))
    def reach(level):
        k = int(np.argmax(z >= level))
        return t[k - 1] + (t[k] - t[k - 1]) * (level - z[k - 1]) / (z[k] - z[k - 1])
    out = np.nonzero(np.abs(z - 1) > 0.02)[0]
    k = out[-1]
    a, b = abs(z[k] - 1), abs(z[k + 1] - 1)
    settle = t[k] + (a - 0.02) / (a - b) * (t[k + 1] - t[k])
    return overshoot, reach(0.9) - reach(0.1), settle


def step_at(num, den, t):
    """Step response of num/den at the increasing times t (not evenly spaced, which
    scipy.signal.step needs): the state space of scipy.signal.tf2ss, and over each interval
    the exponential of [[A, B], [0, 0]], exact for a constant input."""
    A, B, C, D = scipy.signal.tf2ss(num, den)
    n = A.shape[0]
    M = np.zeros((n + 1, n + 1))
    M[:n, :n] = A
    M[:n, n:] = B
    w = np.zeros(n + 1)
    w[n] = 1.0
    out, prev = [], 0.0
    for ti in t:
        if ti > prev:
            w = scipy.linalg.expm(M * (ti - prev)) @ w
            prev = ti
        out.append(float(C @ w[:n]) + D[0, 0])
    return np.array(out)


def check_step(chk, tbeta, fname, num, den, doc, verdict):
    """The closed loop of these netlists is T/(1 + T) (A_inf = 1, A0 = 0): its step response
    num/(den + num) at tbeta's sample times, and the figures from both sample sets."""
    where = os.path.basename(fname)
    out = subprocess.run([tbeta, "step", fname, "--csv"], capture_output=True, text=True)
    chk.expect(out.returncode == 0, "%s: tbeta step exit %d" % (where, out.returncode))
    rows = np.array([[float(v) for v in line.split(",")] for line in out.stdout.split()[1:]])
    t, y = rows[:, 0], rows[:, 1]
    y_ref = step_at(num, np.polyadd(den, num), t)
    final = num[-1] / (den[-1] + num[-1])
    err = np.abs(y - y_ref).max() / abs(final) if verdict == "stable" else 0.0
    chk.expect(err <= REL_TOL, "%s: step response off scipy by %.3g of the final value" % (where, err))
    step = doc["step_response"]
    if verdict != "stable":
        chk.expect(step["overshoot_pct"] is None, "%s: step figures of an unstable loop" % where)
        return
    ov, rise, settle = step_figures(t, y_ref, final)
    chk.expect(close(step["overshoot_pct"], ov, 1e-3, 1e-4), "%s: overshoot %r, scipy %r" % (where, step["overshoot_pct"], ov))
    chk.expect(close(step["rise_s"], rise, 1e-3), "%s: rise %r, scipy %r" % (where, step["rise_s"], rise))
    chk.expect(close(step["settling_s"], settle, 1e-3), "%s: settling %r, scipy %r" % (where, step["settling_s"], settle))
    chk.expect(close(step["final_value"], final, 1e-9), "%s: final value" % where)


def check_census(chk, tbeta, fname):
    """--all-sources: every source's crossings and peak against the dense test-source T
    of mna_check; a source flagged exactly when unmarked, |T| >= 1 and its T is not a
    marked loop's."""
    with open(fname, encoding="utf-8", errors="replace") as handle:
        ckt = mna_check.read_netlist(handle.read())
    mna = mna_check.Mna(ckt)
    out = subprocess.run([tbeta, "report", fname, "--json", "--all-sources"], capture_output=True, text=True)
    census = json.loads(out.stdout)["census"]
    where = os.path.basename(fname)
    kinds = [e for e in ckt.elements if e.kind in "efgh"]
    chk.expect(len(census) == len(kinds), "%s: census of %d sources, netlist has %d" % (where, len(census), len(kinds)))
    marked = {l.lower() for l in ckt.loops}
    for entry in census:
        name = entry["source"].lower()
        for c in entry["unity"]:
            T = mna_check.loop_point(mna, name, 1j * TWO_PI * c["hz"])["T"]
            chk.expect(abs(abs(T) - 1) <= 1e-6, "%s census %s: |T| = %r at a crossing" % (where, name, abs(T)))
        if entry["in_loop"] and entry["max_T_hz"] > 0:
            T = mna_check.loop_point(mna, name, 1j * TWO_PI * entry["max_T_hz"])["T"]
            chk.expect(close(entry["max_T_db"], 20 * math.log10(abs(T)), 1e-6, 1e-9),
                       "%s census %s: max |T| %r dB, dense %r" % (where, name, entry["max_T_db"], 20 * math.log10(abs(T))))
        chk.expect(entry["marked"] == (name in marked), "%s census %s: marked" % (where, name))
        want = (name not in marked and entry["same_loop_as"] is None and entry["in_loop"]
                and (entry["max_T_db"] >= 0 or entry["T_infinite_somewhere"]))
        chk.expect(entry["flagged"] == want, "%s census %s: flag" % (where, name))
    return census


def check_no_nan(chk, tbeta, fname):
    """No NaN or Inf in any output of the stability work (text, JSON, census, step CSV)."""
    texts = []
    for args in (["report", fname, "--all-sources"], ["report", fname, "--json", "--all-sources"],
                 ["step", fname]):
        texts.append(subprocess.run([tbeta] + args, capture_output=True, text=True).stdout)
    bad = [w for w in re.findall(r"[A-Za-z_]+", " ".join(texts)) if w.lower() in ("nan", "inf", "infinity")]
    chk.expect(not bad, "%s: %r reached an output" % (os.path.basename(fname), bad[:3]))


def check_exit_codes(chk, tbeta):
    """Thresholds: exit 1 when a stated threshold or the verdict fails, 0 otherwise."""
    cases = [("stab_threepole.net", [], 0), ("stab_threepole.net", ["--strict"], 0),
             ("stab_threepole.net", ["--pm-min", "70"], 1), ("stab_threepole.net", ["--gm-min", "13"], 1),
             ("stab_threepole_unstable.net", [], 0), ("stab_threepole_unstable.net", ["--strict"], 1),
             ("stab_threepole.net", ["--pm-min", "sixty"], 2)]
    for name, opts, want in cases:
        out = subprocess.run([tbeta, "report", os.path.join(STAB, name)] + opts, capture_output=True, text=True)
        chk.expect(out.returncode == want, "%s %s: exit %d, expected %d" % (name, " ".join(opts), out.returncode, want))


# ----------------------------------------- route 2: dense pencil, any netlist --

def finite_eigs(G, C):
    """Finite roots of det(G + sC), scipy.linalg.eig on the balanced pencil (G, -C)."""
    gs = max(np.abs(G).max(), 1e-300)
    cs = np.abs(C).max()
    if cs == 0:
        return np.array([])
    w, vr = scipy.linalg.eig(G / gs, -C / cs, homogeneous_eigvals=True)
    alpha, beta = w
    keep = np.abs(beta) * 1e9 > np.abs(alpha)
    return alpha[keep] / beta[keep] * gs / cs


def pencil(mna, gains=None):
    M = mna.assemble(1j, gains)   # G + jC: both parts exact, no difference taken
    return M.real, M.imag


def check_pencil(chk, tbeta, fname):
    with open(fname, encoding="utf-8", errors="replace") as handle:
        ckt = mna_check.read_netlist(handle.read())
    mna = mna_check.Mna(ckt)
    doc = tbeta_json(tbeta, fname)
    where = os.path.relpath(fname)
    G, C = pencil(mna)
    cl = finite_eigs(G, C)
    for loop in doc["loops"]:
        name = loop["source"].lower()
        poles = loop["poles"]
        if not poles["computed"]:
            continue
        chk.expect(poles["closed_loop_finite"] == len(cl),
                   "%s %s: %d finite poles, scipy %d" % (where, name, poles["closed_loop_finite"], len(cl)))
        for p in poles["least_damped"]:
            s = complex(p["re"], p["im"])
            d = min(abs(s - r) for r in cl) if len(cl) else math.inf
            chk.expect(d <= POLE_TOL * abs(s), "%s %s: pole %r not an eigenvalue" % (where, name, s))
        chk.expect(poles["closed_loop_rhp"] == rhp(cl), "%s %s: closed-loop RHP count" % (where, name))
        G0, C0 = pencil(mna, {name: 0.0})
        ol = finite_eigs(G0, C0)
        chk.expect(poles["open_loop_rhp"] == rhp(ol), "%s %s: open-loop RHP count" % (where, name))
        check_crossings_dense(chk, where, mna, name, loop)
    print("ok %s: pencil of %d unknowns, %d finite poles" % (where, mna.size, len(cl)))


def check_crossings_dense(chk, where, mna, name, loop):
    for c in loop["crossings"]["unity"]:
        T = mna_check.loop_point(mna, name, 1j * TWO_PI * c["hz"])["T"]
        chk.expect(abs(abs(T) - 1) <= 1e-6, "%s %s: |T| = %r at a unity crossing" % (where, name, abs(T)))
        pm = wrap180(math.degrees(np.angle(T)) + 180)
        chk.expect(close(c["phase_margin_deg"], pm, 0, DEG_TOL),
                   "%s %s: PM %r, dense %r" % (where, name, c["phase_margin_deg"], pm))
    for c in loop["crossings"]["phase"]:
        T = mna_check.loop_point(mna, name, 1j * TWO_PI * c["hz"])["T"]
        off = wrap180(math.degrees(np.angle(T)) + 180)
        chk.expect(abs(off) <= DEG_TOL, "%s %s: phase off -180 by %r deg" % (where, name, off))
        gm = -20 * math.log10(abs(T))
        chk.expect(close(c["gain_margin_db"], gm, REL_TOL, 1e-9), "%s %s: GM %r, dense %r" % (where, name, c["gain_margin_db"], gm))


def main(argv):
    if not argv:
        print("usage: stability_check.py TBETA [NETLIST...]", file=sys.stderr)
        return 2
    tbeta, files = argv[0], argv[1:]
    stab = sorted(glob.glob(os.path.join(STAB, "*.net")))
    chk = Checks()
    for fname in stab:
        if os.path.basename(fname) in ANALYTIC:
            try:
                check_analytic(chk, tbeta, fname)
            except (OSError, RuntimeError, KeyError, TypeError, ValueError) as exc:
                chk.expect(False, "%s: %s" % (fname, exc))
    check_exit_codes(chk, tbeta)
    for fname in stab:
        try:
            check_no_nan(chk, tbeta, fname)
            census = check_census(chk, tbeta, fname)
        except (OSError, RuntimeError, KeyError, TypeError, ValueError, mna_check.NetlistError) as exc:
            chk.expect(False, "%s: %s" % (fname, exc))
            continue
        if os.path.basename(fname) == "stab_minor_loop.net":
            flags = {e["source"]: e["flagged"] for e in census}
            chk.expect(flags == {"G2": True, "G1": False}, "stab_minor_loop.net: flags %r" % flags)
    for fname in files + stab:
        try:
            check_pencil(chk, tbeta, fname)
        except (OSError, RuntimeError, KeyError, TypeError, ValueError, mna_check.NetlistError) as exc:
            chk.expect(False, "%s: %s" % (fname, exc))
    print("stability_check: %d passed, %d failed" % (chk.passed, chk.failed))
    return 1 if chk.failed else 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
