#!/usr/bin/python3
"""tests/ref/at_check.py: the figures at chosen frequencies (`tbeta report --at`) against an
independent dense computation at frequencies that lie on no sweep grid.

Usage:
    /usr/bin/python3 tests/ref/at_check.py TBETA [NETLIST...]

Shares no code with tbeta: the reader, the dense MNA and the reference loop quantities are those
of tests/ref/mna_check.py (numpy/scipy), which computes, at s = j 2 pi f:
  T      det M / det M0 - 1 (Bode's return difference, references.md section 1) and by a
         test-source solve on M0
  A, A0  direct solves with the loop source's gain at k and at 0
  A_inf  a bordered (nullor) solve
For every loop of every netlist given and of tests/fb/, at four frequencies chosen off the .ac
grid (three inside the sweep at irrational fractions of its span in log f, one a third of a
decade above it) it runs `TBETA report FILE --json --no-stability --at F1,F2,F3,F4` and compares:
  T, |1 + T|, arg T (mod 360 degrees), A, A_inf, A0;
  with .ideal (estimate G): the parts A_inf - G, -A_inf/(1+T), A0/(1+T) (references.md
  section 2) from the reference A_inf, A0 and T;
  with .zport: Z = r' M^-1 r and Z0 = r' M0^-1 r for a node pair (-1/(M^-1 e_j)_j for i(V)),
  T_oc = T (node pair; T_sc = T for i(V)), and the other return ratio from Blackman's
  Z = Z0 (1 + T_sc)/(1 + T_oc) (R. B. Blackman, Bell Syst. Tech. J. 22(3), 1943) applied to
  the reference Z, Z0 and T.
Agreement: relative 1e-8 with an absolute floor of 1e-6 of the quantity family's scale (the
gains: max(|A|, |A_inf|); T and ports: their own magnitude), as in mna_check.py; the phase to
1e-6 degrees; port return ratios derived through Blackman to 1e-12 |1 + T| absolute as well.
Prints one line per failure and a closing `at_check: N passed, M failed`.
"""

import glob
import json
import math
import os
import re
import subprocess
import sys

import numpy as np

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import mna_check as ref  # noqa: E402  (the independent reader and MNA)

RTOL = 1e-8
FLOOR = 1e-6
PHASE_ATOL_DEG = 1e-6   # about RTOL radians
RATIO_ATOL = 1e-12      # of |1 + T|: port return ratios that are zero in exact arithmetic
FRACTIONS = (0.2360679774997897, 0.5772156649015329, 0.8414709848078965)  # sqrt5-2, Euler's gamma, sin 1


class Tally:
    def __init__(self):
        self.passed = 0
        self.failed = 0

    def close(self, label, got, want, scale, atol=0.0):
        if want is None:  # does not exist: tbeta must say null
            self.passed += got is None
            self.failed += got is not None
            if got is not None:
                print(f"FAIL {label}: tbeta gives {got}, yet the reference has no value")
            return
        if got is None:
            self.failed += 1
            print(f"FAIL {label}: tbeta gives null, reference {want}")
            return
        g = complex(got["re"], got["im"]) if isinstance(got, dict) else complex(got)
        if abs(g - want) <= max(RTOL * max(abs(want), FLOOR * scale), atol):
            self.passed += 1
        else:
            self.failed += 1
            print(f"FAIL {label}: tbeta {g}, reference {want} (scale {scale:.3g})")


def chosen(ac):
    """Four frequencies on no grid point: three inside the sweep, one above it."""
    _, _, f1, f2 = ac
    inside = [f1 * (f2 / f1) ** x for x in FRACTIONS]
    return inside + [f2 * 10 ** (1 / 3)]


def directives(text):
    """.ideal estimate G (or None) and the .zport ports [(name, kind, a, b)] of the netlist."""
    ideal, ports = None, []
    for line in text.splitlines()[1:]:
        low = line.split(";")[0].strip().lower()
        if low.startswith(".ideal"):
            kv = dict(re.findall(r"(\w+)\s*=\s*(\S+)", low))
            ideal = ref.parse_value(kv["gain"]) if "gain" in kv else 1.0 / ref.parse_value(kv["beta"])
        elif low.startswith(".zport"):
            m = re.match(r"\.zport\s+(\S+)\s+([vi])\(\s*([^,\s)]+)\s*(?:,\s*([^)\s]+))?\s*\)", low)
            ports.append((m.group(1), m.group(2), m.group(3), m.group(4) or "0"))
    return ideal, ports


def port_reference(mna, pt, kind, a, b):
    """Z, Z0, T_sc, T_oc of one port from the reference solves."""
    if kind == "v":
        r = np.zeros(mna.size, dtype=complex)
        for node, sign in ((a, 1.0), (b, -1.0)):
            if node not in ref.GROUND:
                r[mna.node[node]] += sign
        y, y0 = pt["M"].solve(r), pt["M0"].solve(r)
        Z, Z0 = r @ y, r @ y0
        Toc = pt["T"]
        Tsc = None if Z0 == 0 else Z / Z0 * (1 + Toc) - 1  # Blackman; Z0 = 0: the port is a short at k = 0
    else:
        e = np.zeros(mna.size, dtype=complex)
        e[mna.branch[a]] = 1.0
        sj, sj0 = pt["M"].solve(e)[mna.branch[a]], pt["M0"].solve(e)[mna.branch[a]]
        if sj == 0 or sj0 == 0:
            return None  # the source sees an open circuit: no impedance to state
        Z, Z0 = -1 / sj, -1 / sj0
        Tsc = pt["T"]
        Toc = (1 + Tsc) * Z0 / Z - 1  # Blackman
    return Z, Z0, Tsc, Toc


def check_loop(tally, tag, mna, loop, entry, f, ideal, ports):
    pt = ref.loop_point(mna, loop, 2j * math.pi * f)
    T = pt["T"]
    if not entry["solved"] or T is None:
        tally.failed += 1
        print(f"FAIL {tag}: not solved at {f} Hz")
        return
    tally.close(f"{tag} T", entry["T"], T, abs(T))
    tally.close(f"{tag} T (determinant route)", entry["T"], pt["T_det"], max(abs(T), abs(1 + T)))
    tally.close(f"{tag} |1 + T|", entry["return_difference"], abs(1 + T), abs(1 + T))
    if T != 0:
        diff = (entry["T_phase_deg"] - math.degrees(np.angle(T)) + 180) % 360 - 180
        tally.close(f"{tag} arg T (mod 360)", diff, 0.0, 0.0, PHASE_ATOL_DEG)
    if mna.ckt.io is not None:
        scale = max(abs(pt["A"]), abs(pt["A_inf"]))
        for key in ("A", "A_inf", "A0"):
            tally.close(f"{tag} {key}", entry[key], pt[key], scale)
        if ideal is not None:
            parts = {"loading": pt["A_inf"] - ideal, "finite_loop_gain": -pt["A_inf"] / (1 + T),
                     "feedthrough": pt["A0"] / (1 + T)}
            for key, want in parts.items():
                tally.close(f"{tag} breakdown {key}", entry["breakdown"][key], want, max(scale, abs(ideal)))
    for p, (name, kind, a, b) in enumerate(ports):
        got = entry["ports"][p]
        zref = port_reference(mna, pt, kind, a, b)
        if zref is None:
            ok = got["Z"] is None
            tally.passed += ok
            tally.failed += not ok
            if not ok:
                print(f"FAIL {tag} port {name}: an open circuit for the source, yet Z = {got['Z']}")
            continue
        Z, Z0, Tsc, Toc = zref
        tally.close(f"{tag} port {name} Z", got["Z"], Z, abs(Z))
        tally.close(f"{tag} port {name} Z0", got["Z0"], Z0, abs(Z0))
        # derived through Blackman from Z/Z0, the reference carries |1 + T| times its rounding
        atol = RATIO_ATOL * max(abs(1 + pt["T"]), 1.0)
        ratios = max(abs(Tsc or 0), abs(Toc or 0))
        tally.close(f"{tag} port {name} T_sc", got["T_sc"], Tsc, ratios, atol)
        tally.close(f"{tag} port {name} T_oc", got["T_oc"], Toc, ratios, atol)


def check_file(tbeta, path, tally):
    text = open(path, encoding="utf-8", errors="replace").read()
    # the wire-break directive is no part of the reference's subset (its 0 V source stays)
    plain = "\n".join(l for l in text.splitlines() if not l.strip().lower().startswith(".break"))
    try:
        ckt = ref.read_netlist(plain)
        mna = ref.Mna(ckt)
    except ref.NetlistError:
        return
    if not ckt.loops or not ckt.ac_given:
        return
    ideal, ports = directives(text)
    freqs = chosen(ckt.ac)
    grid = ref.ac_grid(ckt.ac)
    if any(min(abs(f / g - 1) for g in grid) < 1e-6 for f in freqs):
        return  # a chosen frequency on a grid point would not show that the solve is fresh
    at = ",".join(repr(f) for f in freqs)
    out = subprocess.run([tbeta, "report", path, "--json", "--no-stability", "--at", at], capture_output=True,
                         text=True)
    if out.returncode != 0:
        tally.failed += 1
        print(f"FAIL {path}: tbeta exit {out.returncode}: {out.stderr.strip()[:200]}")
        return
    doc = json.loads(out.stdout)
    if len(doc.get("at", [])) != len(freqs):
        tally.failed += 1
        print(f"FAIL {path}: {len(doc.get('at', []))} entries under 'at' for {len(freqs)} frequencies")
        return
    for i, f in enumerate(freqs):
        entry = doc["at"][i]
        tally.close(f"{path} at[{i}] hz", entry["hz"], f, f)
        for l, loop in enumerate(ckt.loops):
            check_loop(tally, f"{path} {loop} at {f:.6g} Hz", mna, loop, entry["loops"][l], f, ideal, ports)


def main(argv):
    if len(argv) < 2:
        print("usage: at_check.py TBETA [NETLIST...]", file=sys.stderr)
        return 2
    tbeta = argv[1]
    paths = sorted(set(glob.glob("tests/fb/*.net")) | set(argv[2:]))
    tally = Tally()
    for path in paths:
        check_file(tbeta, path, tally)
    if tally.passed == 0:
        tally.failed += 1
        print("FAIL nothing was checked (run from the repository root)")
    print(f"at_check: {tally.passed} passed, {tally.failed} failed")
    return 0 if tally.failed == 0 else 1


if __name__ == "__main__":
    sys.exit(main(sys.argv))
