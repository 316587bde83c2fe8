#!/usr/bin/python3
"""tests/ref/feedback_check.py: independent dense check of the hand-estimate breakdown, the
desensitivity re-solve, Blackman's impedances and the wire-break loop gain.

Usage:
    /usr/bin/python3 tests/ref/feedback_check.py TBETA [NETLIST...]

Shares no code with tbeta: its own reader of the netlist subset (R C L V I E G, .ac .loop .io
.ideal .zport .break; a netlist with anything else is skipped), its own dense complex MNA at DC
(numpy), and for the first .loop of every netlist in tests/fb/ (and of any NETLIST given that uses
.ideal, .zport or .break) it computes, without any rank-one formula:
  T         det M / det M0 - 1 (Bode's return difference, references.md section 1)
  A, A0     direct solves with the loop source's gain at k and at 0
  A_inf     a bordered nullor solve (source output free, controlling variable forced to 0)
  parts     A_inf - G, -A_inf/(1+T), A0/(1+T) (references.md section 2) and their sum = A - G
  A(k*1.05) a direct solve with the changed gain (references.md section 5)
  Z, Z0     r' M^-1 r and r' M0^-1 r for a node pair; -1/(M^-1 e_j)_j for a source port
  T_sc      det ratio of the circuit with a 0 V source across the port (node pair), T for a
            source port; T_oc: T for a node pair, det ratio with the source removed for a source port
  tables    `TBETA sweep FILE --table ...`: one row per point, breakdown parts adding up
  Tv, Ti, T at a .break: y-parameters of the circuit without the break source at nodes x and y,
            Tv = (Y12+Y22)/(Y11+Y21), Ti = (Y11+Y12)/(Y21+Y22), T = (Y12-Y21)/(Y11+Y22+2 Y21)
            (references.md section 7)
and compares them with `TBETA report FILE --json` (relative 1e-9, with an absolute floor of
1e-12 of the quantity's scale for values that are zero in exact arithmetic).
Prints one line per failure and a closing `feedback_check: N passed, M failed`.
"""

import glob
import json
import math
import re
import subprocess
import sys

import numpy as np

RTOL = 1e-9
SUFFIX = {"f": 1e-15, "p": 1e-12, "n": 1e-9, "u": 1e-6, "m": 1e-3, "k": 1e3, "meg": 1e6, "g": 1e9, "t": 1e12}


def value(tok):
    m = re.match(r"^([+-]?(?:\d+\.?\d*|\.\d+)(?:e[+-]?\d+)?)(meg|[fpnumkgt])?", tok.lower())
    if not m:
        raise ValueError(tok)
    return float(m.group(1)) * SUFFIX.get(m.group(2) or "", 1.0)


class Circuit:
    def __init__(self):
        self.elems = []  # (kind, name, nodes, value)
        self.loops = []
        self.io = None
        self.ideal = None
        self.zports = []  # (label, kind 'v'|'i', a, b)
        self.brk = None


def read(text):
    lines = text.splitlines()[1:]
    cards = []
    for line in lines:
        line = line.split(";")[0].rstrip()
        if not line.strip() or line.lstrip().startswith("*"):
            continue
        if line.startswith("+") and cards:
            cards[-1] += " " + line[1:]
        else:
            cards.append(line)
    ckt = Circuit()
    for card in cards:
        low = card.lower()
        tok = card.split()
        if low.startswith(".end"):
            break
        if low.startswith(".ac"):
            continue
        if low.startswith(".loop"):
            ckt.loops += [t.lower() for t in tok[1:]]
        elif low.startswith(".io"):
            m = re.match(r"\.io\s+(\S+)\s+v\(\s*([^,\s)]+)\s*(?:,\s*([^)\s]+))?\s*\)", low)
            if not m:
                return None
            ckt.io = (m.group(1), m.group(2), m.group(3) or "0")
        elif low.startswith(".ideal"):
            kv = dict(re.findall(r"(\w+)\s*=\s*(\S+)", low))
            g = value(kv["gain"]) if "gain" in kv else 1.0 / value(kv["beta"])
            ckt.ideal = (g, value(kv.get("spread", "5")))
        elif low.startswith(".zport"):
            m = re.match(r"\.zport\s+(\S+)\s+([vi])\(\s*([^,\s)]+)\s*(?:,\s*([^)\s]+))?\s*\)", low)
            ckt.zports.append((m.group(1), m.group(2), m.group(3), m.group(4) or "0"))
        elif low.startswith(".break"):
            ckt.brk = tok[1].lower()
        elif low.startswith("."):
            return None
        else:
            kind = low[0]
            name = tok[0].lower()
            if kind in "rcl":
                ckt.elems.append((kind, name, [tok[1].lower(), tok[2].lower()], value(tok[3])))
            elif kind in "vi":
                ckt.elems.append((kind, name, [tok[1].lower(), tok[2].lower()], None))
                if "ac" in [t.lower() for t in tok]:
                    ckt.elems[-1] = (kind, name, ckt.elems[-1][2], "ac")
            elif kind in "eg":
                ckt.elems.append((kind, name, [t.lower() for t in tok[1:5]], value(tok[5])))
            else:
                return None
    return ckt


class MNA:
    """Dense MNA at DC of ckt, with gain overrides, removed V sources and extra 0 V shorts."""

    def __init__(self, ckt, gains=None, removed=(), shorts=()):
        self.ckt = ckt
        gains = gains or {}
        nodes = ["0"]
        for _, _, nd, _ in ckt.elems:
            for n in nd:
                n = "0" if n == "gnd" else n
                if n not in nodes:
                    nodes.append(n)
        self.node = {n: i - 1 for i, n in enumerate(nodes)}
        self.branch = {}
        n = len(nodes) - 1
        for kind, name, _, _ in ckt.elems:
            if kind in "vle" and name not in removed:
                self.branch[name] = n
                n += 1
        for i, _ in enumerate(shorts):
            self.branch[("short", i)] = n
            n += 1
        self.n = n
        M = np.zeros((n, n), dtype=complex)

        def idx(nd):
            return self.node["0" if nd == "gnd" else nd]

        def add(r, c, v):
            if r >= 0 and c >= 0:
                M[r, c] += v

        for kind, name, nd, val in ckt.elems:
            if name in removed:
                continue
            k = gains.get(name, val)
            p, m = idx(nd[0]), idx(nd[1])
            if kind == "r":
                g = 1.0 / val
                add(p, p, g), add(p, m, -g), add(m, p, -g), add(m, m, g)
            elif kind in "ve":
                j = self.branch[name]
                add(p, j, 1), add(m, j, -1), add(j, p, 1), add(j, m, -1)
                if kind == "e":
                    add(j, idx(nd[2]), -k), add(j, idx(nd[3]), k)
            elif kind == "l":  # a short at DC
                j = self.branch[name]
                add(p, j, 1), add(m, j, -1), add(j, p, 1), add(j, m, -1)
            elif kind == "g":
                cp, cm = idx(nd[2]), idx(nd[3])
                add(p, cp, k), add(p, cm, -k), add(m, cp, -k), add(m, cm, k)
        for i, (a, b) in enumerate(shorts):
            j = self.branch[("short", i)]
            p, m = idx(a), idx(b)
            add(p, j, 1), add(m, j, -1), add(j, p, 1), add(j, m, -1)
        self.M = M
        self.idx = idx

    def vec(self, a, b="0"):
        e = np.zeros(self.n, dtype=complex)
        if self.idx(a) >= 0:
            e[self.idx(a)] += 1
        if self.idx(b) >= 0:
            e[self.idx(b)] -= 1
        return e

    def solve(self, b):
        return np.linalg.solve(self.M, b)

    def logdet(self):
        sign, ld = np.linalg.slogdet(self.M)
        return sign, ld


def det_ratio(m1, m0):
    s1, l1 = m1.logdet()
    s0, l0 = m0.logdet()
    return s1 / s0 * math.exp(l1 - l0)


def elem(ckt, name):
    for e in ckt.elems:
        if e[1] == name:
            return e
    return None


def gain_A(ckt, gains=None):
    m = MNA(ckt, gains)
    src, oa, ob = ckt.io
    b = np.zeros(m.n, dtype=complex)
    b[m.branch[src]] = 1
    return (m.vec(oa, ob) @ m.solve(b)), m


def nullor_A(ckt, loop):
    """Bordered solve: the loop source's output is a free unknown z; one row forces its control to 0."""
    m0 = MNA(ckt, {loop: 0.0})
    kind, _, nd, _ = elem(ckt, loop)
    n = m0.n
    B = np.zeros((n + 1, n + 1), dtype=complex)
    B[:n, :n] = m0.M
    if kind == "g":
        u = m0.vec(nd[0], nd[1])
    else:
        u = np.zeros(n, dtype=complex)
        u[m0.branch[loop]] = -1
    B[:n, n] = u
    B[n, :n] = m0.vec(nd[2], nd[3])
    b = np.zeros(n + 1, dtype=complex)
    b[m0.branch[ckt.io[0]]] = 1
    x = np.linalg.solve(B, b)
    return m0.vec(ckt.io[1], ckt.io[2]) @ x[:n]


class Tally:
    def __init__(self):
        self.passed = 0
        self.failed = 0

    def close(self, label, got, want, scale):
        if got is None:
            self.failed += 1
            print(f"FAIL {label}: tbeta gives null, want {want}")
            return
        g = complex(got["re"], got["im"]) if isinstance(got, dict) else complex(got)
        err = abs(g - want)
        if err <= RTOL * max(abs(want), 1e-3 * scale):
            self.passed += 1
        else:
            self.failed += 1
            print(f"FAIL {label}: tbeta {g}, reference {want} (scale {scale})")


def check(tbeta, path, tally):
    ckt = read(open(path).read())
    if ckt is None or not ckt.loops:
        return
    if not (ckt.ideal or ckt.zports or ckt.brk):
        return
    loop = ckt.loops[0]
    out = subprocess.run([tbeta, "report", path, "--json", "--no-stability"], capture_output=True, text=True)
    if out.returncode != 0:
        tally.failed += 1
        print(f"FAIL {path}: tbeta exit {out.returncode}: {out.stderr.strip()}")
        return
    fb = json.loads(out.stdout)["loops"][0]["feedback"]
    k = elem(ckt, loop)[3]
    m, m0 = MNA(ckt), MNA(ckt, {loop: 0.0})
    T = det_ratio(m, m0) - 1
    tag = f"{path} {loop}"
    if ckt.io and ckt.ideal:
        G, spread = ckt.ideal
        A, _ = gain_A(ckt)
        A0, _ = gain_A(ckt, {loop: 0.0})
        Ainf = nullor_A(ckt, loop)
        scale = max(abs(A), abs(G))
        dc = fb["dc"]
        tally.close(f"{tag} A - G", dc["A_minus_G"], A - G, scale)
        tally.close(f"{tag} loading", dc["loading"], Ainf - G, scale)
        tally.close(f"{tag} finite loop gain", dc["finite_loop_gain"], -Ainf / (1 + T), scale)
        tally.close(f"{tag} feedthrough", dc["feedthrough"], A0 / (1 + T), scale)
        tally.close(f"{tag} parts add up", (Ainf - G) - Ainf / (1 + T) + A0 / (1 + T), A - G, scale)
        for side, sign in (("gain_plus", 1), ("gain_minus", -1)):
            A1, _ = gain_A(ckt, {loop: k * (1 + sign * spread / 100)})
            # a relative change is dimensionless: two separate solves leave a few ulps of 1 in it
            tally.close(f"{tag} {side} re-solved", fb[side]["resolved"], A1 / A - 1, 1.0)
    for p, (label, kind, a, b) in enumerate(ckt.zports):
        z = fb["impedances"]["ports"][p]["dc"]
        if kind == "v":
            r, r0 = m.vec(a, b), m0.vec(a, b)
            Z, Z0 = r @ m.solve(r), r0 @ m0.solve(r0)
            Tsc = det_ratio(MNA(ckt, shorts=[(a, b)]), MNA(ckt, {loop: 0.0}, shorts=[(a, b)])) - 1
            Toc = T
        else:
            e, e0 = np.zeros(m.n, dtype=complex), np.zeros(m0.n, dtype=complex)
            e[m.branch[a]] = 1
            e0[m0.branch[a]] = 1
            Z, Z0 = -1 / m.solve(e)[m.branch[a]], -1 / m0.solve(e0)[m0.branch[a]]
            Tsc = T
            Toc = det_ratio(MNA(ckt, removed=[a]), MNA(ckt, {loop: 0.0}, removed=[a])) - 1
        tally.close(f"{tag} port {label} Z", z["Z"], Z, abs(Z))
        tally.close(f"{tag} port {label} Z0", z["Z0"], Z0, abs(Z0))
        tally.close(f"{tag} port {label} T_sc", z["T_sc"], Tsc, max(abs(Tsc), abs(Toc)))
        tally.close(f"{tag} port {label} T_oc", z["T_oc"], Toc, max(abs(Tsc), abs(Toc)))
        tally.close(f"{tag} port {label} Blackman", z["Z_blackman"], Z, abs(Z))
    if ckt.brk:
        _, _, nd, _ = elem(ckt, ckt.brk)
        x, y = nd
        rest = MNA(ckt, removed=[ckt.brk])
        P = np.stack([rest.vec(x), rest.vec(y)], axis=1)
        Zm = P.T @ np.linalg.solve(rest.M, P)
        Y = np.linalg.inv(Zm)
        Y11, Y12, Y21, Y22 = Y[0, 0], Y[0, 1], Y[1, 0], Y[1, 1]
        wb = fb["wire_break"]
        Tb = (Y12 - Y21) / (Y11 + Y22 + 2 * Y21)
        tally.close(f"{tag} break Tv", wb["Tv"], (Y12 + Y22) / (Y11 + Y21), 1.0)
        tally.close(f"{tag} break Ti", wb["Ti"], (Y11 + Y12) / (Y21 + Y22), 1.0)
        tally.close(f"{tag} break T", wb["T"], Tb, 1.0)
        tally.close(f"{tag} break T_probe", wb["T_probe"], Tb, 1.0)


def check_tables(tbeta, path, ckt, tally):
    """The command line's tables: one row per sweep point, parts adding up to A - G, exit 2 for a
    table the netlist does not have."""
    points = json.loads(subprocess.run([tbeta, "report", path, "--json", "--no-stability"], capture_output=True,
                                       text=True).stdout)["sweep"]["points"]
    tables = (["breakdown"] if ckt.io and ckt.ideal else []) + ["zport:" + z[0] for z in ckt.zports]
    tables += ["break"] if ckt.brk else []
    for table in tables:
        out = subprocess.run([tbeta, "sweep", path, "--table", table], capture_output=True, text=True)
        rows = out.stdout.strip().splitlines()
        if out.returncode != 0 or len(rows) != points + 1 or not rows[0].startswith("freq_hz,"):
            tally.failed += 1
            print(f"FAIL {path} --table {table}: exit {out.returncode}, {len(rows)} lines for {points} points")
            continue
        tally.passed += 1
        if table == "breakdown":
            for row in rows[1:]:
                v = [float(x) for x in row.split(",")]
                tally.close(f"{path} breakdown row parts", complex(v[3] + v[5] + v[7], v[4] + v[6] + v[8]),
                            complex(v[1], v[2]), abs(complex(v[1], v[2])) + 1e-300)
    out = subprocess.run([tbeta, "sweep", path, "--table", "zport:no_such_port"], capture_output=True, text=True)
    if out.returncode == 2 and "no table" in out.stderr:
        tally.passed += 1
    else:
        tally.failed += 1
        print(f"FAIL {path}: a missing table gives exit {out.returncode}")


def main(argv):
    if len(argv) < 2:
        print("usage: feedback_check.py TBETA [NETLIST...]", file=sys.stderr)
        return 2
    tbeta = argv[1]
    paths = sorted(set(glob.glob("tests/fb/*.net")) | set(argv[2:]))
    tally = Tally()
    for path in paths:
        check(tbeta, path, tally)
        ckt = read(open(path).read())
        if ckt is not None and ckt.loops and (ckt.ideal or ckt.zports or ckt.brk):
            check_tables(tbeta, path, ckt, tally)
    if tally.passed == 0:
        tally.failed += 1
        print("FAIL no netlist with .ideal, .zport or .break was checked (run from the repository root)")
    print(f"feedback_check: {tally.passed} passed, {tally.failed} failed")
    return 0 if tally.failed == 0 else 1


if __name__ == "__main__":
    sys.exit(main(sys.argv))
