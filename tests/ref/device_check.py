#!/usr/bin/python3
"""tests/ref/device_check.py: device cards (Q, M) against the outside.

Usage:
    /usr/bin/python3 tests/ref/device_check.py TBETA [ignored...]

Three checks on the netlists of tests/device/ (the other arguments, which tests/run.sh
gives every reference script, are ignored):

1. Expansion: each NAME_device.net (transistors as device cards) against NAME_hand.net
   (the same circuit with the transistors written out by hand as their small-signal parts,
   the formulas written as .param expressions). Every column of `tbeta sweep --csv` for
   every loop, and the census T(0) of `report --json --all-sources`, agree to 1e-12
   relative to the largest magnitude, at the same frequency, of the quantities computed
   together (T; A, A_inf, A0; a); dB and degrees to 1e-12 absolutely. The hand-written
   netlists order their elements differently, so the matrices round differently.
2. Closed forms at DC, computed here from the netlists' .param values with numpy:
   - common-emitter stage with emitter degeneration (ce_closed.net):
       A = -beta RC/(RS + rbb + r_pi + (beta + 1) RE)
     (Sedra and Smith, Microelectronic Circuits, the common-emitter amplifier with an
     emitter resistance, from memory); A_inf = -RC/RE and
       T = gm RE r_pi/(RE + r_pi + rbb + RS)
     (the return ratio of gm: our own nodal derivation, written out in ce_closed.net's
     header; with the nullor v_be = 0 no base current flows, so v_e = v_s);
   - source follower with body effect (sf_closed.net):
       A = gm RL'/(1 + (gm + gmb) RL'), RL' = RS || r_o
     (Gray, Hurst, Lewis and Meyer, Analysis and Design of Analog Integrated Circuits,
     the common-drain stage, from memory); A_inf = 1, T = gm RL'/(1 + gmb RL').
   Thermal voltage VT = k T/q with the exact SI values of k and q (BIPM, the SI brochure,
   9th edition); gm = IC/VT, r_pi = beta/gm (same sources, from memory).
3. The macromodel library (netlists/lib/*.inc): each model in a unity follower
   (lib_MODEL.net), T(jw) at every point of the sweep against the A(s) its header states
   times the output divider, and A_inf(0) = 1.
4. Hierarchical names: the census of sub_device.net lists X1.Q1 and X2.Q1, that of
   cs_device.net M1 and M1.gmb.

Exit status: 0 all passed, 1 a check failed, 2 usage error.
"""

import csv
import io
import json
import os
import re
import subprocess
import sys

import numpy as np

HERE = os.path.dirname(os.path.abspath(__file__))
DEVICE = os.path.join(HERE, "..", "device")
RTOL = 1e-12
CLOSED_RTOL = 1e-11  # a KLU solve of a handful of nodes against the formula: a few ulps
BOLTZMANN = 1.380649e-23
CHARGE = 1.602176634e-19
SUFFIXES = (("meg", 1e6), ("f", 1e-15), ("p", 1e-12), ("n", 1e-9), ("u", 1e-6),
            ("m", 1e-3), ("k", 1e3), ("g", 1e9), ("t", 1e12))
NUMBER = re.compile(r"[+-]?(?:\d+\.?\d*|\.\d+)(?:e[+-]?\d+)?")

# (device netlist, hand netlist, [(loop in device, loop in hand)])
PAIRS = [
    ("ce", [("Q1", "Gq")]),
    ("cs", [("M1", "Gm"), ("M1.gmb", "Gmb")]),
    ("sub", [("X1.Q1", "X1.Gq"), ("X2.Q1", "X2.Gq")]),
]

failures = 0
checks = 0


def check(ok, what):
    global failures, checks
    checks += 1
    if not ok:
        failures += 1
        print("FAIL device_check: " + what)


def value(token):
    """An engineering value: number, optional suffix, trailing letters ignored."""
    text = token.lower()
    match = NUMBER.match(text)
    if match is None:
        raise ValueError("not a value: %r" % token)
    rest = text[match.end():]
    scale = 1.0
    for suffix, factor in SUFFIXES:
        if rest.startswith(suffix):
            scale = factor
            break
    return float(match.group(0)) * scale


def params(path):
    """The plain NAME=VALUE pairs of the netlist's .param cards (no expressions)."""
    out = {}
    with open(path, encoding="utf-8") as f:
        for line in f:
            if line.lower().startswith(".param"):
                for name, text in re.findall(r"(\w+)=([^\s{}]+)", line):
                    out[name.lower()] = value(text)
    return out


def run(tbeta, *args):
    proc = subprocess.run([tbeta] + list(args), capture_output=True, text=True, check=False)
    if proc.returncode != 0:
        raise RuntimeError("%s %s: exit %d\n%s" % (tbeta, " ".join(args), proc.returncode, proc.stderr))
    return proc.stdout


def sweep(tbeta, path, loop):
    rows = list(csv.DictReader(io.StringIO(run(tbeta, "sweep", path, "--csv", "--loop", loop))))
    cols = [c for c in rows[0] if c != "freq_hz"]
    freqs = np.array([float(r["freq_hz"]) for r in rows])
    return freqs, {c: np.array([float(r[c]) if r[c] else np.nan for r in rows]) for c in cols}


def family_scale(cols, col):
    """The floor of column col at each point: the largest magnitude, at that point, of the
    quantities computed together with it. A0 comes from the difference of two solutions as
    large as A (design.md, "Accuracy"), so A, A_inf and A0 share |A|, |A_inf|, |A0| as their
    scale; T its own magnitude; dB and degrees are compared absolutely to 1e-12 of a unit."""
    families = (("A_re", "A_im", "Ainf_re", "Ainf_im", "A0_re", "A0_im"), ("T_re", "T_im"),
                ("aol_re", "aol_im"))
    for fam in families:
        if col in fam:
            mags = [np.hypot(cols[fam[i]], cols[fam[i + 1]]) for i in range(0, len(fam), 2)]
            return np.nan_to_num(np.max(mags, axis=0))
    return np.ones(len(cols[col]))


def close(got, want, rtol, floor):
    return abs(got - want) <= rtol * max(abs(want), floor)


def census(tbeta, path):
    data = json.loads(run(tbeta, "report", path, "--json", "--all-sources"))
    return {row["source"]: row for row in data["census"]}


def check_pair(tbeta, name, loops):
    dev = os.path.join(DEVICE, name + "_device.net")
    hand = os.path.join(DEVICE, name + "_hand.net")
    for dloop, hloop in loops:
        fd, cd = sweep(tbeta, dev, dloop)
        fh, ch = sweep(tbeta, hand, hloop)
        check(np.array_equal(fd, fh), "%s: frequency grids differ" % name)
        for col, want in ch.items():
            got = cd[col]
            scale = family_scale(ch, col)
            bad = [i for i in range(len(want))
                   if not (np.isnan(got[i]) and np.isnan(want[i]))
                   and not close(got[i], want[i], RTOL, scale[i])]
            check(not bad, "%s loop %s column %s: %d of %d points differ beyond 1e-12 (first at %g Hz: %r vs %r)"
                  % (name, dloop, col, len(bad), len(want), fd[bad[0]] if bad else 0,
                     got[bad[0]] if bad else 0, want[bad[0]] if bad else 0))
    cen_d = census(tbeta, dev)
    cen_h = census(tbeta, hand)
    for dloop, hloop in loops:
        check(dloop in cen_d, "%s: census has no %s (it has %s)" % (name, dloop, sorted(cen_d)))
        if dloop in cen_d and hloop in cen_h:
            check(close(cen_d[dloop]["T_dc"], cen_h[hloop]["T_dc"], RTOL, 0),
                  "%s: census T(0) of %s %r, of %s %r" % (name, dloop, cen_d[dloop]["T_dc"],
                                                        hloop, cen_h[hloop]["T_dc"]))


def dc_of(tbeta, path):
    data = json.loads(run(tbeta, "report", path, "--json"))
    return data["loops"][0]["dc"]


def check_ce(tbeta):
    path = os.path.join(DEVICE, "ce_closed.net")
    p = params(path)
    vt = BOLTZMANN * (25.0 + 273.15) / CHARGE  # the card's default tj = 25 degrees C
    gm = p["ic"] / vt
    rpi = p["b"] / gm
    want = {
        "A": -p["b"] * p["rc"] / (p["rs"] + p["rb"] + rpi + (p["b"] + 1) * p["re"]),
        "A_inf": -p["rc"] / p["re"],
        "T": gm * p["re"] * rpi / (p["re"] + rpi + p["rb"] + p["rs"]),
    }
    dc = dc_of(tbeta, path)
    for key, w in want.items():
        check(close(dc[key], w, CLOSED_RTOL, 0), "ce_closed: %s = %r, closed form %r" % (key, dc[key], w))


def check_sf(tbeta):
    path = os.path.join(DEVICE, "sf_closed.net")
    p = params(path)
    gmb = p["chi"] * p["gm"]
    rl = 1.0 / (1.0 / p["rs"] + p["gds"])
    want = {
        "A": p["gm"] * rl / (1 + (p["gm"] + gmb) * rl),
        "A_inf": 1.0,
        "T": p["gm"] * rl / (1 + gmb * rl),
    }
    dc = dc_of(tbeta, path)
    for key, w in want.items():
        check(close(dc[key], w, CLOSED_RTOL, 0), "sf_closed: %s = %r, closed form %r" % (key, dc[key], w))


def opamp_gain(model, p, s):
    """A(s) of a library macromodel as its header states it (netlists/lib/*.inc)."""
    a = p["a0"] / (1 + s * p["a0"] / (2 * np.pi * p["gbw"]))
    if model in ("opamp2", "opamp3", "opamp2z"):
        a = a / (1 + s / (2 * np.pi * p["p2"]))
    if model == "opamp3":
        a = a / (1 + s / (2 * np.pi * p["p3"]))
    if model == "opamp2z":
        a = a * (1 - s / (2 * np.pi * p["fz"]))
    return a


def library_T(model, p, s):
    """T(s) of lib_MODEL.net, a unity follower with the source zeroed: the input resistance
    hangs from the output to ground (common practice: node analysis of the follower)."""
    if model.startswith("ota"):
        z = 1 / (1 / p["rout"] + 1 / p["rl"] + 1 / p["rin"] + s * p["cl"])
        h = 1 / (1 + s / (2 * np.pi * p["p2"])) if model == "ota2" else 1
        return p["gm"] * z * h
    rl = 1 / (1 / p["rl"] + 1 / p["rin"])
    return opamp_gain(model, p, s) * rl / (rl + p["rout"])


def check_library(tbeta):
    for model in ("opamp1", "opamp2", "opamp3", "opamp2z", "ota1", "ota2"):
        path = os.path.join(DEVICE, "lib_%s.net" % model)
        p = params(path)
        loop = "XA.Ga" if model.startswith("ota") else "XU1.Ga"
        freqs, cols = sweep(tbeta, path, loop)
        got = cols["T_re"] + 1j * cols["T_im"]
        want = library_T(model, p, 2j * np.pi * freqs)
        err = np.abs(got - want) / np.abs(want)
        check(np.max(err) <= CLOSED_RTOL, "library %s: T differs from the stated A(s) by %.3g (relative) at %g Hz"
              % (model, np.max(err), freqs[np.argmax(err)]))
        dc = dc_of(tbeta, path)
        check(close(dc["A_inf"], 1.0, CLOSED_RTOL, 0), "library %s: A_inf(0) = %r, a follower's is 1"
              % (model, dc["A_inf"]))


def main(argv):
    if len(argv) < 2:
        print(__doc__)
        return 2
    tbeta = argv[1]
    for name, loops in PAIRS:
        check_pair(tbeta, name, loops)
    check_ce(tbeta)
    check_sf(tbeta)
    check_library(tbeta)
    if failures:
        print("device_check: %d of %d checks failed" % (failures, checks))
        return 1
    print("device_check: %d checks passed" % checks)
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))
