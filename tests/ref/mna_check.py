#!/usr/bin/python3
"""tests/ref/mna_check.py: independent dense-MNA reference check of tbeta's loop quantities.

Usage:
    /usr/bin/python3 tests/ref/mna_check.py TBETA NETLIST...
    /usr/bin/python3 tests/ref/mna_check.py --self-test

This script shares no code with tbeta. It has its own reader of the netlist
subset of shared/design.md, its own dense complex MNA (numpy/scipy LAPACK) and,
for every `.loop` source and every frequency of the `.ac` grid, computes:

  T      twice: det M / det M0 - 1 (return difference, Bode; references.md
         section 1) and by a test-source solve on M0 (T = -k * returned);
  A      direct solve M x = b, unit excitation of the .io source;
  A0     direct solve with the marked source's gain set to zero;
  A_inf  bordered (nullor) solve: the source output is a free unknown and one
         added row forces the controlling variable to zero (references.md
         section 2), no large-gain limit and no rank-one formula;
  a      A_inf * T when tbeta prints it.

M0 is the physical matrix with the marked gain zeroed (other loop sources keep
their gains). Every dense solve is equilibrated and refined twice with the
residual accumulated in extended precision, so the reference is accurate to a
few units of double rounding even when T is large (where tbeta's rank-one
formulas lose digits).

It then runs `TBETA sweep FILE --csv --loop NAME` and `TBETA report FILE
--json` and compares every row and the DC values. Before any of that it runs
its own self-test against the closed forms of references.md (checks 1, 2a,
2a', 2b, 2b', 2c, 8b) and a few conventions of design.md; a failing
self-test stops the run.

Exit status: 0 all passed, 1 a check failed, 2 usage error.
"""

import csv
import io
import json
import math
import os
import re
import subprocess
import sys
import warnings

import numpy as np
import scipy.linalg

# Agreement criterion, for every compared quantity Q at every point:
#     |Q_tbeta - Q_ref| <= RTOL * max(|Q_ref|, FLOOR * S)
# S is the largest magnitude over the sweep and DC of the quantity's family:
# |T| for T; max(|A|, |A_inf|, |A0|) for the three gains (same units, built
# from the same solution vectors); |a| for a. Justification: a value below
# FLOOR * S arises from cancellation between terms as large as S (a zero of
# A_inf, a transmission zero, an exactly-zero A0 of an ideal VCVS stage), and
# double rounding leaves an absolute noise of a few 1e-16 * S there. The
# floor RTOL * FLOOR * S = 1e-15 * S is about five ulps of S, so such values
# are compared absolutely at that level instead of relatively; every value
# above a millionth of the family's maximum is held to 1e-9 relative.
# The determinant route (reported as T_det) computes 1 + T, so its error
# scales with |1 + T|: it is held to RTOL * max(|T|, |1 + T|, FLOOR * S); the
# test-source route carries the strict check of small T.
RTOL = 1e-9
FLOOR = 1e-6
FREQ_RTOL = 1e-12
# Scaled (equilibrated) matrices with a 2-norm reciprocal condition number
# below this are taken as singular when tbeta reports a value as undefined:
# about 500 ulps, far below any well-posed circuit in the library.
SINGULAR_RCOND = 1e-13

GROUND = ("0", "gnd")
SUFFIXES = (("meg", 1e6), ("f", 1e-15), ("p", 1e-12), ("n", 1e-9),
            ("u", 1e-6), ("m", 1e-3), ("k", 1e3), ("g", 1e9), ("t", 1e12))
NUMBER = re.compile(r"[+-]?(?:\d+\.?\d*|\.\d+)(?:e[+-]?\d+)?")
BRANCH_KINDS = "vleh"


class NetlistError(Exception):
    """A card the reader of the subset cannot accept."""


# ---------------------------------------------------------------- reader --

def parse_value(token):
    """Number with optional suffix (f p n u m k meg g t), trailing letters ignored."""
    text = token.lower()
    match = NUMBER.match(text)
    if match is None:
        raise NetlistError("not a value: %r" % token)
    value = float(match.group(0))
    rest = text[match.end():]
    for suffix, factor in SUFFIXES:
        if rest.startswith(suffix):
            value *= factor
            break
    if not math.isfinite(value):
        raise NetlistError("value is not finite: %r" % token)
    return value


def is_value(token):
    return NUMBER.match(token.lower()) is not None


class Element:
    def __init__(self, kind, name, nodes, value=None, ctrl_nodes=None, sense=None):
        self.kind = kind          # one of r c l v i e g f h
        self.name = name          # lower case
        self.nodes = nodes        # (n+, n-) lower case
        self.value = value        # R, C, L value or controlled-source gain
        self.ctrl_nodes = ctrl_nodes
        self.sense = sense        # name of the sensing V source (F, H)


class Circuit:
    def __init__(self):
        self.title = ""
        self.elements = []
        self.by_name = {}
        self.loops = []           # names as written on the .loop cards
        self.io = None            # (src name, ("v", n1, n2) or ("i", vname))
        self.ac = ("dec", 20, 1.0, 1e9)   # design.md default when .ac is absent
        self.ac_given = False


def logical_cards(text):
    """(line number, tokens) per card: title skipped, comments removed, '+' joined."""
    lines = text.lstrip("\ufeff").splitlines()
    cards = []
    for number, raw in enumerate(lines[1:], start=2):
        line = raw.strip()
        if not line or line.startswith("*"):
            continue
        line = line.split(";", 1)[0].strip()
        if not line:
            continue
        if line.startswith("+"):
            if not cards:
                raise NetlistError("line %d: continuation without a card" % number)
            cards[-1][1].extend(line[1:].split())
            continue
        tokens = line.split()
        if tokens[0].lower() == ".end":
            break
        cards.append((number, tokens))
    return cards


def parse_out(text):
    spec = text.replace(" ", "").lower()
    match = re.fullmatch(r"v\(([^,()]+)(?:,([^,()]+))?\)", spec)
    if match:
        return ("v", match.group(1), match.group(2) or "0")
    match = re.fullmatch(r"i\(([^,()]+)\)", spec)
    if match:
        return ("i", match.group(1))
    raise NetlistError("output must be v(n), v(n1,n2) or i(Vname): %r" % text)


def parse_directive(ckt, number, tokens):
    word = tokens[0].lower()
    if word == ".ac":
        if len(tokens) != 5 or tokens[1].lower() not in ("dec", "oct", "lin"):
            raise NetlistError("line %d: .ac dec|oct|lin N f1 f2" % number)
        count = int(round(parse_value(tokens[2])))
        ckt.ac = (tokens[1].lower(), count, parse_value(tokens[3]), parse_value(tokens[4]))
        ckt.ac_given = True
    elif word == ".loop":
        if len(tokens) < 2:
            raise NetlistError("line %d: .loop NAME" % number)
        ckt.loops.extend(tokens[1:])
    elif word == ".io":
        if len(tokens) < 3 or ckt.io is not None:
            raise NetlistError("line %d: one .io SRC OUT" % number)
        ckt.io = (tokens[1].lower(), parse_out("".join(tokens[2:])))
    elif word in (".expect", ".margins", ".ideal", ".zport"):
        pass  # expectations, thresholds, the hand estimate, impedance ports: nothing to solve
    else:
        raise NetlistError("line %d: directive outside the subset: %s" % (number, tokens[0]))


def parse_element(number, tokens):
    name = tokens[0].lower()
    kind = name[0]
    need = {"r": 4, "c": 4, "l": 4, "v": 3, "i": 3, "e": 6, "g": 6, "f": 5, "h": 5}
    if kind not in need:
        raise NetlistError("line %d: card outside the subset: %s" % (number, tokens[0]))
    if len(tokens) < need[kind]:
        raise NetlistError("line %d: too few fields on %s" % (number, tokens[0]))
    nodes = (tokens[1].lower(), tokens[2].lower())
    if kind in "rcl":
        value = parse_value(tokens[3])
        if value == 0.0:
            raise NetlistError("line %d: %s must be non-zero" % (number, tokens[0]))
        return Element(kind, name, nodes, value=value)
    if kind in "vi":
        for token in tokens[3:]:          # DC and AC values play no part in A
            if token.lower() not in ("dc", "ac") and not is_value(token):
                raise NetlistError("line %d: bad source field %r" % (number, token))
        return Element(kind, name, nodes)
    if kind in "eg":
        return Element(kind, name, nodes, value=parse_value(tokens[5]),
                       ctrl_nodes=(tokens[3].lower(), tokens[4].lower()))
    return Element(kind, name, nodes, value=parse_value(tokens[4]), sense=tokens[3].lower())


def read_netlist(text):
    ckt = Circuit()
    first = text.lstrip("\ufeff").splitlines()
    ckt.title = first[0] if first else ""
    for number, tokens in logical_cards(text):
        if tokens[0].startswith("."):
            parse_directive(ckt, number, tokens)
            continue
        element = parse_element(number, tokens)
        if element.name in ckt.by_name:
            raise NetlistError("line %d: duplicate name %s" % (number, tokens[0]))
        ckt.elements.append(element)
        ckt.by_name[element.name] = element
    validate(ckt)
    return ckt


def validate(ckt):
    for element in ckt.elements:
        if element.sense is not None:
            sensed = ckt.by_name.get(element.sense)
            if sensed is None or sensed.kind != "v":
                raise NetlistError("%s: %s is not a V source" % (element.name, element.sense))
    for loop in ckt.loops:
        element = ckt.by_name.get(loop.lower())
        if element is None or element.kind not in "egfh":
            raise NetlistError(".loop %s: not a controlled source (E G F H)" % loop)
    if ckt.io is not None:
        src = ckt.by_name.get(ckt.io[0])
        if src is None or src.kind not in "vi":
            raise NetlistError(".io %s: not an independent V or I source" % ckt.io[0])
        out = ckt.io[1]
        if out[0] == "i":
            element = ckt.by_name.get(out[1])
            if element is None or element.kind not in BRANCH_KINDS:
                raise NetlistError(".io: i(%s) names no V source" % out[1])


def ac_grid(ac):
    """Frequencies of `.ac`: dec/oct f1*base^(i/N) while <= f2 (1e-12 slack); lin N points."""
    kind, count, f1, f2 = ac
    if kind == "lin":
        return np.linspace(f1, f2, count) if count > 1 else np.array([f1])
    base = 10.0 if kind == "dec" else 2.0
    freqs = []
    i = 0
    while True:
        f = f1 * base ** (i / count)
        if f > f2 * (1 + 1e-12):
            break
        freqs.append(f)
        i += 1
    return np.array(freqs)


# ------------------------------------------------------------------- MNA --

class Mna:
    """Dense MNA of a circuit: node voltages, then branch currents of V, L, E, H."""

    def __init__(self, ckt):
        self.ckt = ckt
        self.node = {}
        for element in ckt.elements:
            for name in element.nodes + (element.ctrl_nodes or ()):
                if name not in GROUND and name not in self.node:
                    self.node[name] = len(self.node)
        self.branch = {}
        for element in ckt.elements:
            if element.kind in BRANCH_KINDS:
                self.branch[element.name] = len(self.node) + len(self.branch)
        self.size = len(self.node) + len(self.branch)

    def idx(self, node):
        return -1 if node in GROUND else self.node[node]

    def assemble(self, s, gains=None):
        """M(s) = G + sC with controlled-source gains overridden by `gains`."""
        gains = gains or {}
        M = np.zeros((self.size, self.size), dtype=complex)

        def add(row, col, val):
            if row >= 0 and col >= 0:
                M[row, col] += val

        for e in self.ckt.elements:
            p, n = self.idx(e.nodes[0]), self.idx(e.nodes[1])
            k = gains.get(e.name, e.value)
            if e.kind in "rc":
                y = 1.0 / e.value if e.kind == "r" else s * e.value
                add(p, p, y); add(n, n, y); add(p, n, -y); add(n, p, -y)
            elif e.kind == "g":
                cp, cn = self.idx(e.ctrl_nodes[0]), self.idx(e.ctrl_nodes[1])
                add(p, cp, k); add(p, cn, -k); add(n, cp, -k); add(n, cn, k)
            elif e.kind == "f":
                js = self.branch[e.sense]
                add(p, js, k); add(n, js, -k)
            if e.kind in BRANCH_KINDS:
                j = self.branch[e.name]
                add(p, j, 1.0); add(n, j, -1.0)      # branch current leaves n+
                add(j, p, 1.0); add(j, n, -1.0)      # row: v(n+) - v(n-) ...
                if e.kind == "l":
                    add(j, j, -s * e.value)          # ... - sL i = 0
                elif e.kind == "e":
                    cp, cn = self.idx(e.ctrl_nodes[0]), self.idx(e.ctrl_nodes[1])
                    add(j, cp, -k); add(j, cn, k)    # ... - k v(cp,cn) = 0
                elif e.kind == "h":
                    add(j, self.branch[e.sense], -k)  # ... - k i(Vs) = 0
        return M

    def excitation(self):
        """Unit AC excitation of the .io source, every other source zero."""
        b = np.zeros(self.size, dtype=complex)
        src = self.ckt.by_name[self.ckt.io[0]]
        if src.kind == "v":
            b[self.branch[src.name]] = 1.0
        else:   # 1 A from n+ through the source to n-: leaves n+, enters n-
            self._inject(b, src.nodes, 1.0)
        return b

    def _inject(self, b, nodes, current):
        p, n = self.idx(nodes[0]), self.idx(nodes[1])
        if p >= 0:
            b[p] -= current
        if n >= 0:
            b[n] += current

    def output(self):
        c = np.zeros(self.size, dtype=complex)
        out = self.ckt.io[1]
        if out[0] == "i":
            c[self.branch[out[1]]] = 1.0
        else:
            for node, sign in ((out[1], 1.0), (out[2], -1.0)):
                if node not in GROUND:
                    if node not in self.node:
                        raise NetlistError(".io: unknown node %s" % node)
                    c[self.node[node]] += sign
        return c

    def controlling(self, name):
        """Row vector reading the controlling variable of a controlled source."""
        e = self.ckt.by_name[name]
        r = np.zeros(self.size, dtype=complex)
        if e.kind in "eg":
            for node, sign in ((e.ctrl_nodes[0], 1.0), (e.ctrl_nodes[1], -1.0)):
                if node not in GROUND:
                    r[self.node[node]] += sign
        else:
            r[self.branch[e.sense]] = 1.0
        return r

    def test_source(self, name):
        """RHS of an independent unit source of the same kind in place of k * x_c."""
        e = self.ckt.by_name[name]
        t = np.zeros(self.size, dtype=complex)
        if e.kind in "gf":
            self._inject(t, e.nodes, 1.0)    # 1 A from n+ through the source to n-
        else:
            t[self.branch[e.name]] = 1.0     # v(n+) - v(n-) = 1 V
        return t

    def bordered(self, M0, name):
        """M0 plus a free output unknown y of the source and the row x_c = 0."""
        e = self.ckt.by_name[name]
        N = self.size
        B = np.zeros((N + 1, N + 1), dtype=complex)
        B[:N, :N] = M0
        if e.kind in "gf":
            p, n = self.idx(e.nodes[0]), self.idx(e.nodes[1])
            if p >= 0:
                B[p, N] += 1.0
            if n >= 0:
                B[n, N] -= 1.0
        else:
            B[self.branch[e.name], N] = -1.0  # v(n+) - v(n-) - y = 0
        B[N, :N] = self.controlling(name)
        return B


# ---------------------------------------------------------- dense solves --

def equilibration(M):
    """Power-of-two row and column scalings (exact in binary) of M."""
    def pow2(vals):
        out = np.ones_like(vals)
        nz = vals > 0
        out[nz] = 2.0 ** (-np.round(np.log2(vals[nz])))
        return out
    dr = pow2(np.abs(M).max(axis=1))
    dc = pow2(np.abs(M * dr[:, None]).max(axis=0))
    return dr, dc


class Dense:
    """LU of an equilibrated dense matrix; refined solves and log-determinant."""

    def __init__(self, M, scaling=None):
        self.M = M
        self.dr, self.dc = scaling if scaling is not None else equilibration(M)
        self.Ms = M * self.dr[:, None] * self.dc[None, :]
        self.singular = not np.all(np.isfinite(self.Ms))
        if not self.singular:
            with warnings.catch_warnings():     # exact singularity is checked below
                warnings.simplefilter("ignore", scipy.linalg.LinAlgWarning)
                self.lu, self.piv = scipy.linalg.lu_factor(self.Ms, check_finite=False)
            self.singular = bool(np.any(np.diag(self.lu) == 0))

    def solve(self, b, refine=2):
        """x with M x = b, or None when M is exactly singular."""
        if self.singular:
            return None
        x = self.dc * scipy.linalg.lu_solve((self.lu, self.piv), self.dr * b)
        M_ext = self.M.astype(np.clongdouble)
        b_ext = b.astype(np.clongdouble)
        for _ in range(refine):
            r = (b_ext - M_ext @ x.astype(np.clongdouble)).astype(complex)
            x = x + self.dc * scipy.linalg.lu_solve((self.lu, self.piv), self.dr * r)
        return x if np.all(np.isfinite(x)) else None

    def logdet(self):
        """(phase factor, log|det|) of the scaled matrix; (0, -inf) if singular."""
        if self.singular:
            return 0.0, -math.inf
        d = np.diag(self.lu)
        swaps = int(np.sum(self.piv != np.arange(len(self.piv))))
        phase = np.prod(d / np.abs(d)) * (-1.0) ** swaps
        return phase, float(np.sum(np.log(np.abs(d))))

    def rcond(self):
        if self.singular:
            return 0.0
        sv = np.linalg.svd(self.Ms, compute_uv=False)
        return float(sv[-1] / sv[0]) if sv[0] > 0 else 0.0


def loop_point(mna, loop, s):
    """Reference quantities of one loop at complex frequency s (None = undefined)."""
    name = loop.lower()
    k = mna.ckt.by_name[name].value
    M = mna.assemble(s)
    M0 = mna.assemble(s, {name: 0.0})
    dm = Dense(M)
    dm0 = Dense(M0, (dm.dr, dm.dc))        # same scaling: factors cancel in the ratio
    res = {"M": dm, "M0": dm0}
    # Return difference: det M / det M0 = 1 + T (references.md section 1).
    ph, ld = dm.logdet()
    ph0, ld0 = dm0.logdet()
    res["T_det"] = None if ph0 == 0 else ph / ph0 * math.exp(ld - ld0) - 1.0
    # Test source: unit source of the same kind, T = -k * returned x_c (section 1).
    y = dm0.solve(mna.test_source(name))
    res["T"] = None if y is None else -k * (mna.controlling(name) @ y)
    res["A"] = res["A0"] = res["A_inf"] = None
    if mna.ckt.io is not None:
        b = mna.excitation()
        c = mna.output()
        x = dm.solve(b)
        x0 = dm0.solve(b)
        B = Dense(mna.bordered(M0, name))
        res["B"] = B
        xb = B.solve(np.append(b, 0.0))
        res["A"] = None if x is None else c @ x
        res["A0"] = None if x0 is None else c @ x0
        res["A_inf"] = None if xb is None else c @ xb[:-1]
    return res


# ------------------------------------------------------------- self-test --

def par(*rs):
    return 1.0 / sum(1.0 / r for r in rs)


class SelfTest:
    def __init__(self):
        self.count = 0
        self.failures = []

    def close(self, label, got, want, rtol=1e-12, atol=0.0):
        self.count += 1
        if got is None or abs(got - want) > rtol * abs(want) + atol:
            self.failures.append("%s: got %r, want %r" % (label, got, want))

    def loop(self, label, text, want, s=0.0, loop=None, rtol=1e-12, atol=1e-15):
        """Every reference route of `text` against closed forms in `want`."""
        ckt = read_netlist(text)
        mna = Mna(ckt)
        res = loop_point(mna, loop or ckt.loops[0], s)
        for key, value in want.items():
            self.close("%s %s" % (label, key), res[key], value, rtol, atol)
        if "T" in want:
            self.close("%s T by det ratio" % label, res["T_det"], want["T"], 1e-11, atol)
        return res


def self_test():
    st = SelfTest()

    # design.md "Netlist subset": suffixes, case, trailing letters, 1F = femto.
    for token, want in (("10kOhm", 1e4), ("2.2uF", 2.2e-6), ("1F", 1e-15), ("1meg", 1e6),
                        ("1MEG", 1e6), ("1M", 1e-3), ("3.3n", 3.3e-9), ("1e3", 1e3),
                        (".5p", 0.5e-12), ("-2m", -2e-3), ("1.5e-2k", 15.0), ("4g", 4e9),
                        ("2t", 2e12), ("7mil", 7e-3), ("10", 10.0)):
        st.close("value %s (design.md subset)" % token, parse_value(token), want, 1e-15)

    # design.md "Netlist subset": grids, both ends included.
    st.close("dec grid count", len(ac_grid(("dec", 10, 1.0, 1e3))), 31, 0)
    st.close("dec grid end", ac_grid(("dec", 10, 1.0, 1e3))[-1], 1e3)
    st.close("oct grid count", len(ac_grid(("oct", 2, 1.0, 8.0))), 7, 0)
    st.close("oct grid point", ac_grid(("oct", 2, 1.0, 8.0))[3], 2.0 ** 1.5)
    st.close("lin grid count", len(ac_grid(("lin", 5, 10.0, 50.0))), 5, 0)
    st.close("lin grid point", ac_grid(("lin", 5, 10.0, 50.0))[2], 30.0)

    # Reader: title is line 1 whatever it holds, comments, ';', '+', case, .end.
    ckt = read_netlist("R1 a b 5 ; a title that looks like a card\n"
                       "* comment\n"
                       "vIN IN 0 dc 1 AC 1 0 ; trailing\n"
                       "R1 in\n+ OUT 2K ; continued card\n"
                       "e1 out 0 in out\n+ 1e3\n"
                       ".LOOP E1\n.ac Oct 3 1k 8K\n.io Vin V( out )\n.END\nrbad x\n")
    st.close("reader: one resistor read", len([e for e in ckt.elements if e.kind == "r"]), 1, 0)
    st.close("reader: continued value", ckt.by_name["r1"].value, 2e3)
    st.close("reader: continued gain", ckt.by_name["e1"].value, 1e3)
    st.close("reader: .ac grid", len(ac_grid(ckt.ac)), 10, 0)
    st.close("reader: .io", 1.0 if ckt.io == ("vin", ("v", "out", "0")) else 0.0, 1.0)

    # design.md conventions: an I source drives current from n+ through itself to
    # n- (so `I 0 a` pushes current into a); i(V) flows into n+ through V to n-.
    conv = ("conv\nI1 0 a AC 1\nRa a 0 1k\nE1 b 0 a 0 1\nRb b c 1k\nVm c 0 0\n"
            ".loop E1\n.io I1 %s\n")
    st.loop("I-source direction (design.md)", conv % "v(a)", {"A": 1e3})
    st.loop("i(V) direction (design.md)", conv % "i(Vm)", {"A": 1.0})
    st.loop("v(n1,n2) output (design.md)", conv % "v(0,b)", {"A": -1e3})

    # references.md check 1 and 2c: shunt-shunt gm stage, Rs 1k, RF 10k, RD 10k, gm 10m.
    Rs, RF, RD, gm = 1e3, 1e4, 1e4, 1e-2
    Gs, GF, GD = 1 / Rs, 1 / RF, 1 / RD
    det_y = (Gs + GF) * (GF + GD) + GF * (gm - GF)        # check 1: 2x2 nodal det
    det_y0 = (Gs + GF) * (GF + GD) - GF * GF
    want = {"T": gm * RD * Rs / (Rs + RF + RD),            # check 1 closed form
            "A0": RD / (Rs + RF + RD),                       # check 2c
            "A_inf": -RF / Rs,                               # check 2c
            "A": (GF - gm) / (GF + GD) * Gs / (Gs + GF - GF * (GF - gm) / (GF + GD))}
    c2c = ("check 1/2c\nVs vs 0 AC 1\nRs vs g 1k\nRF g d 10k\nRD d 0 10k\nG1 d 0 g 0 10m\n"
           ".loop G1\n.io Vs v(d)\n")
    res = st.loop("check 2c", c2c, want)
    st.close("check 1 det ratio 1+T = det Y/det Y0", 1 + res["T_det"], det_y / det_y0, 1e-12)
    st.close("check 1 printed T", res["T"], 4.7619048, 1e-7)
    st.close("check 2c printed A", res["A"], -8.1818182, 1e-7)
    st.close("check 2c Rosenstark", (res["A_inf"] * res["T"] + res["A0"]) / (1 + res["T"]),
             res["A"], 1e-12)

    # references.md check 2a: ideal non-inverting VCVS stage.
    a, R1, R2 = 1e3, 1e3, 9e3
    T = a * R1 / (R1 + R2)
    c2a = ("check 2a\nVin in 0 AC 1\nE1 out 0 in n 1000\nR2 out n 9k\nR1 n 0 1k\n"
           ".loop E1\n.io Vin v(out)\n")
    res = st.loop("check 2a", c2a, {"T": T, "A_inf": 1 + R2 / R1, "A0": 0.0,
                                    "A": (1 + R2 / R1) * T / (1 + T)})
    st.close("check 2a printed A", res["A"], 9.9009901, 1e-7)

    # references.md check 2a': finite Rs, Ri, Ro, RL.
    Rs, Ri, Ro, RL = 10e3, 100e3, 1e3, 2e3
    Rfb = R2 + par(R1, Ri + Rs)
    T = a * (par(RL, Rfb) / (Ro + par(RL, Rfb))) * (par(R1, Ri + Rs) / Rfb) * (Ri / (Ri + Rs))
    Rn = par(R1, R2 + par(Ro, RL))
    A0 = Rn / (Rs + Ri + Rn) * par(Ro, RL) / (R2 + par(Ro, RL))
    A_inf = 1 + R2 / R1
    c2a1 = ("check 2a'\nVs vs 0 AC 1\nRs vs p 10k\nRi p n 100k\nE1 x 0 p n 1000\n"
            "Ro x out 1k\nRL out 0 2k\nR2 out n 9k\nR1 n 0 1k\n.loop E1\n.io Vs v(out)\n")
    res = st.loop("check 2a'", c2a1, {"T": T, "A_inf": A_inf, "A0": A0,
                                      "A": (A_inf * T + A0) / (1 + T)})
    st.close("check 2a' printed T", res["T"], 56.353903, 1e-7)
    st.close("check 2a' printed A0", res["A0"], 5.6353903e-4, 1e-7)
    st.close("check 2a' printed A", res["A"], 9.8256538, 1e-7)

    # references.md check 2b: inverting, finite input resistance, Ro = 0.
    G1, G2, Gi = 1e-3, 1e-4, 1e-4
    c2b = ("check 2b\nVs in 0 AC 1\nR1 in n 1k\nR2 n out 10k\nRi n 0 10k\n"
           "E1 out 0 0 n 1000\n.loop E1\n.io Vs v(out)\n")
    res = st.loop("check 2b", c2b, {"T": a * G2 / (G1 + G2 + Gi), "A_inf": -G1 / G2,
                                    "A0": 0.0, "A": -a * G1 / (G1 + G2 + Gi + a * G2)})
    st.close("check 2b printed T", res["T"], 83.333333, 1e-7)
    st.close("check 2b printed A", res["A"], -9.8814229, 1e-7)

    # references.md check 2b': plus Rs 1k in series with R1 and Ro 1k.
    Rs, R1, R2, Ri, Ro = 1e3, 1e3, 1e4, 1e4, 1e3
    Rn = par(Rs + R1, Ri)
    T = a * Rn / (Ro + R2 + Rn)
    vn = (1 / (Rs + R1)) / (1 / (Rs + R1) + 1 / Ri + 1 / (R2 + Ro))
    A0 = vn * Ro / (R2 + Ro)
    A_inf = -R2 / (Rs + R1)
    c2b1 = ("check 2b'\nVs vs 0 AC 1\nRs vs s 1k\nR1 s n 1k\nR2 n out 10k\nRi n 0 10k\n"
            "E1 x 0 0 n 1000\nRo x out 1k\n.loop E1\n.io Vs v(out)\n")
    res = st.loop("check 2b'", c2b1, {"T": T, "A_inf": A_inf, "A0": A0,
                                      "A": (A_inf * T + A0) / (1 + T)})
    st.close("check 2b' printed T", res["T"], 131.57895, 1e-7)
    st.close("check 2b' printed A0", res["A0"], 0.065789474, 1e-7)
    st.close("check 2b' printed A", res["A"], -4.9617904, 1e-7)

    # references.md check 8b: T(s) = 99/(1 + sRC), A(s) = 99/(100 + sRC), RC = 1 ms;
    # closed-loop pole at s = -1e5 rad/s where 1 + T = 0.
    c8b = ("check 8b\nVin in 0 AC 1\nE1 x 0 in out 99\nR x out 1k\nC out 0 1u\n"
           ".loop E1\n.io Vin v(out)\n")
    for s in (0.0, 2j * math.pi * 1e3, 1j * 1e5, 1j * 1e7):
        st.loop("check 8b s=%g" % abs(s), c8b, {"T": 99 / (1 + s * 1e-3), "A_inf": 1.0,
                                               "A0": 0.0, "A": 99 / (100 + s * 1e-3)}, s=s)
    res = st.loop("check 8b pole", c8b, {"T": -1.0}, s=-1e5 + 0j)
    st.close("check 8b det M = 0 at the pole", res["T_det"], -1.0, 0, 1e-12)

    # F loop, I input (derived here by hand): 1 A into n, R1 = R2 = 1k, i(Vs) = v(n)/R2,
    # F pulls 9 i(Vs) out of n: v(n) = 1000/11; test source 1 A out of n gives
    # i(Vs) = -1/2, T = 4.5; A0 (k = 0) = 1/2; A_inf = 0 (i(Vs) forced to zero).
    cf = ("F loop\nIin 0 n AC 1\nR1 n 0 1k\nVs n m 0\nR2 m 0 1k\nF1 n 0 Vs 9\n"
          ".loop F1\n.io Iin i(Vs)\n")
    st.loop("F loop (derived here)", cf, {"T": 4.5, "A": 1 / 11, "A0": 0.5, "A_inf": 0.0})

    # H loop, positive feedback (derived here by hand): 1 A into a, Ra = Rb = Rf = 1k,
    # v(c) = 2k i(Vs) = 2 v(a): v(a) = 1000; test source v(c) = 1 gives v(a) = 1/3,
    # i(Vs) = 1/3000, T = -2/3; A0: v(a) = 1000/3; A_inf: v(a) = 0, v(c) = -1000.
    ch = ("H loop\nI1 0 a AC 1\nRa a 0 1k\nVs a b 0\nRb b 0 1k\nH1 c 0 Vs 2k\nRf c a 1k\n"
          ".loop H1\n.io I1 v(c,a)\n")
    st.loop("H loop (derived here)", ch, {"T": -2 / 3, "A": 1000.0, "A0": -1000 / 3,
                                          "A_inf": -1000.0})

    # Two loops: the other loop source keeps its gain (design.md .loop). Cascade of
    # check 2a stage (loop E1) and a unity gm stage into 1k (loop G2, local, T = 0
    # since G2 does not see its own output): T(E1) = 100 with G2 present.
    c2 = ("two loops\nVin in 0 AC 1\nE1 out 0 in n 1000\nR2 out n 9k\nR1 n 0 1k\n"
          "G2 0 o2 out 0 1m\nR3 o2 0 1k\n.loop E1\n.loop G2\n.io Vin v(o2)\n")
    st.loop("two loops: E1", c2, {"T": 100.0, "A": 1000 / 101}, loop="E1")
    res = st.loop("two loops: G2 (not in a loop)", c2, {"T": 0.0, "A0": 0.0}, loop="G2")
    st.close("two loops: G2 A_inf undefined (v^T w = 0)", 1.0 if res["A_inf"] is None
             or res["B"].rcond() < SINGULAR_RCOND else 0.0, 1.0)

    # Integrator in the loop (design.md edge case): at DC M0 is singular, T = inf,
    # A0 undefined and A_inf = A = 1 (unity feedback).
    ci = ("integrator\nVin in 0 AC 1\nG1 0 z in out 1m\nCz z 0 1n\nE2 out 0 z 0 1\n"
          ".loop G1\n.io Vin v(out)\n")
    res = st.loop("integrator at DC", ci, {"A": 1.0, "A_inf": 1.0})
    st.close("integrator at DC: T and A0 undefined",
             1.0 if res["T"] is None and res["T_det"] is None and res["A0"] is None else 0.0, 1.0)
    return st


# ---------------------------------------------------------- tbeta output --

def run(cmd):
    try:
        proc = subprocess.run(cmd, capture_output=True, text=True, timeout=600)
    except (OSError, subprocess.TimeoutExpired) as err:
        return None, str(err)
    if proc.returncode not in (0, 1):
        return None, "exit %d: %s" % (proc.returncode, proc.stderr.strip()[-2000:])
    return proc.stdout, proc.stderr


def read_csv(text):
    rows = [r for r in csv.reader(io.StringIO(text)) if r and not r[0].startswith("#")]
    if not rows:
        raise ValueError("empty CSV")
    header = [h.strip() for h in rows[0]]   # case matters: A_re is not a_re
    return header, rows[1:]


def cell_complex(row, col, re_name, im_name):
    if re_name not in col:
        return None, False
    re_txt = row[col[re_name]].strip() if col[re_name] < len(row) else ""
    im_txt = row[col[im_name]].strip() if im_name in col and col[im_name] < len(row) else ""
    if re_txt == "" and im_txt == "":
        return None, True
    if re_txt == "" or im_txt == "":
        raise ValueError("%s/%s: one field empty" % (re_name, im_name))
    value = complex(float(re_txt), float(im_txt))
    if not (math.isfinite(value.real) and math.isfinite(value.imag)):
        raise ValueError("non-finite number in %s/%s" % (re_name, im_name))
    return value, True


def json_complex(value):
    if value is None:
        return None
    if isinstance(value, (int, float)):
        return complex(value)
    if isinstance(value, dict) and "re" in value and "im" in value:
        return complex(value["re"], value["im"])
    raise ValueError("neither number, {re,im} nor null: %r" % (value,))


# ------------------------------------------------------------ comparison --

QUANTITIES = (("T", "T_re", "T_im"), ("A", "A_re", "A_im"), ("A_inf", "Ainf_re", "Ainf_im"),
              ("A0", "A0_re", "A0_im"))
FAMILY = {"T": "T", "A": "gain", "A_inf": "gain", "A0": "gain", "a": "a", "T_det": "T"}
UNDEFINED_MATRIX = {"T": "M0", "T_det": "M0", "A0": "M0", "A_inf": "B", "A": "M", "a": "B"}


class LoopCheck:
    def __init__(self, fname, loop):
        self.fname = fname
        self.loop = loop
        self.points = 0
        self.max_err = 0.0
        self.failures = []        # (err, text)
        self.notes = []

    def fail(self, text, err=math.inf):
        self.failures.append((err, text))

    def compare(self, where, quantity, tb, ref, scale, res):
        """One value of tbeta against the reference (None = undefined)."""
        if tb is None and ref is None:
            return
        if tb is None:
            matrix = res.get(UNDEFINED_MATRIX[quantity])
            if matrix is not None and matrix.rcond() < SINGULAR_RCOND:
                self.notes.append("%s %s: undefined in tbeta, reference matrix numerically "
                                  "singular (rcond %.2g): skipped" % (where, quantity,
                                                                      matrix.rcond()))
                return
            self.fail("%s %s: tbeta undefined, reference %s" % (where, quantity, fmt(ref)))
            return
        if ref is None:
            self.fail("%s %s: tbeta %s, reference undefined (exactly singular)"
                      % (where, quantity, fmt(tb)))
            return
        norm = max(abs(ref), FLOOR * scale[FAMILY[quantity]])
        if quantity == "T_det":   # the det ratio gives 1 + T: its error scales with |1 + T|
            norm = max(norm, abs(1 + ref))
        err = abs(tb - ref) / norm if norm > 0 else abs(tb - ref)
        self.max_err = max(self.max_err, err)
        if err > RTOL:
            self.fail("%s %s: tbeta %s, reference %s, rel err %.3g > %g"
                      % (where, quantity, fmt(tb), fmt(ref), err, RTOL), err)

    def report(self):
        for note in self.notes[:5]:
            print("  note %s %s: %s" % (self.fname, self.loop, note))
        if len(self.notes) > 5:
            print("  note %s %s: ... %d more notes" % (self.fname, self.loop,
                                                        len(self.notes) - 5))
        if not self.failures:
            print("ok %s %s: %d points, max rel err %.3g" % (self.fname, self.loop,
                                                             self.points, self.max_err))
            return True
        worst = max(self.failures, key=lambda f: f[0])
        print("FAIL %s %s: %d of the checks failed over %d points; worst: %s"
              % (self.fname, self.loop, len(self.failures), self.points, worst[1]))
        for _, text in self.failures[:8]:
            if text != worst[1]:
                print("  also: %s" % text)
        if len(self.failures) > 9:
            print("  ... %d more" % (len(self.failures) - 9))
        return False


def fmt(z):
    if z is None:
        return "undefined"
    z = complex(z)
    return "%.12g%+.12gj" % (z.real, z.imag)


def scales(refs):
    """Family maxima of |value| over the points (see the criterion above)."""
    out = {"T": 0.0, "gain": 0.0, "a": 0.0}
    for res in refs:
        for q in ("T", "A", "A_inf", "A0"):
            if res.get(q) is not None:
                out[FAMILY[q]] = max(out[FAMILY[q]], abs(res[q]))
        if res.get("T") is not None and res.get("A_inf") is not None:
            out["a"] = max(out["a"], abs(res["T"] * res["A_inf"]))
    return out


def check_reference_routes(chk, where, res, scale):
    """The two T routes of the reference must agree with each other."""
    if (res["T"] is None) != (res["T_det"] is None):
        chk.fail("%s reference routes disagree: test source %s, det ratio %s"
                 % (where, fmt(res["T"]), fmt(res["T_det"])))
    elif res["T"] is not None:
        norm = max(abs(res["T"]), abs(1 + res["T"]), FLOOR * scale["T"])
        if abs(res["T"] - res["T_det"]) / norm > RTOL:
            chk.fail("%s reference routes disagree: T test source %s, det ratio %s"
                     % (where, fmt(res["T"]), fmt(res["T_det"])))


def check_sweep(tbeta, fname, ckt, mna, loop, chk):
    out, err = run([tbeta, "sweep", fname, "--csv", "--loop", loop])
    if out is None:
        chk.fail("tbeta sweep failed: %s" % err)
        return []
    try:
        header, rows = read_csv(out)
    except ValueError as exc:
        chk.fail("sweep CSV unreadable: %s" % exc)
        return []
    col = {name: i for i, name in enumerate(header)}
    missing = [n for n in ("freq_hz", "T_re", "T_im", "A_re", "A_im", "Ainf_re", "Ainf_im",
                           "A0_re", "A0_im") if n not in col]
    if missing:
        chk.fail("sweep CSV lacks columns %s (header %s)" % (missing, header))
        return []
    # The optional column pair for a = A_inf * T (design.md), under either name.
    a_cols = next(((r, i) for r, i in (("aol_re", "aol_im"), ("a_re", "a_im"))
                   if r in col and i in col), None)
    freqs = ac_grid(ckt.ac)
    if len(rows) != len(freqs):
        chk.fail("sweep has %d rows, the .ac grid %s has %d points"
                 % (len(rows), " ".join(str(x) for x in ckt.ac), len(freqs)))
        return []
    refs = [loop_point(mna, loop, 2j * math.pi * f) for f in freqs]
    return [(f, row, res, col, a_cols) for f, row, res in zip(freqs, rows, refs)]


def compare_rows(chk, ckt, points, scale):
    for f, row, res, col, a_cols in points:
        chk.points += 1
        try:
            f_tb = float(row[col["freq_hz"]])
            values = {q: cell_complex(row, col, r, i)[0] for q, r, i in QUANTITIES}
            aol = cell_complex(row, col, a_cols[0], a_cols[1])[0] if a_cols else None
        except (ValueError, IndexError) as exc:
            chk.fail("row at f=%g Hz unreadable: %s" % (f, exc))
            continue
        where = "f=%.12g Hz" % f
        if abs(f_tb - f) > FREQ_RTOL * f:
            chk.fail("%s: tbeta frequency %.17g differs from the grid" % (where, f_tb))
            continue
        check_reference_routes(chk, where, res, scale)
        chk.compare(where, "T", values["T"], res["T"], scale, res)
        chk.compare(where, "T_det", values["T"], res["T_det"], scale, res)
        if ckt.io is None:
            for q in ("A", "A_inf", "A0"):
                if values[q] is not None:
                    chk.fail("%s %s: tbeta prints a value without .io" % (where, q))
            continue
        for q in ("A", "A_inf", "A0"):
            chk.compare(where, q, values[q], res[q], scale, res)
        if a_cols:
            ref_a = None if res["A_inf"] is None or res["T"] is None else res["A_inf"] * res["T"]
            chk.compare(where, "a", aol, ref_a, scale, res)


def check_dc(tbeta, fname, ckt, mna, loop, index, chk, scale, first_freq):
    out, err = run([tbeta, "report", fname, "--json"])
    if out is None:
        chk.fail("tbeta report --json failed: %s" % err)
        return
    try:
        doc = json.loads(out)
        loops = doc["loops"]
        entry = next((e for e in loops if isinstance(e, dict) and any(
            str(e.get(k, "")).lower() == loop.lower() for k in ("name", "loop", "source"))),
            loops[index] if index < len(loops) else None)
        if entry is None or "dc" not in entry:
            chk.fail("JSON has no loops[%d].dc for %s" % (index, loop))
            return
        dc = {q: json_complex(entry["dc"].get(q)) for q in ("T", "A", "A_inf", "A0")}
        dc_hz = entry.get("dc_hz")           # where tbeta says it took the DC values
        dc_hz = None if dc_hz is None else float(dc_hz)
    except (ValueError, KeyError, TypeError) as exc:
        chk.fail("report JSON unreadable: %s" % exc)
        return
    res = loop_point(mna, loop, 0.0)
    where = "DC"
    if res["M"].singular or res["M"].rcond() < SINGULAR_RCOND:
        # design.md: DC only when M(0) is non-singular, else the lowest sweep point.
        if dc_hz is not None and abs(dc_hz - first_freq) > FREQ_RTOL * first_freq:
            chk.fail("DC: M(0) is singular, tbeta takes its DC values at %.17g Hz, "
                     "not at the lowest sweep point %.17g Hz" % (dc_hz, first_freq))
            return
        res = loop_point(mna, loop, 2j * math.pi * first_freq)
        where = "DC (M(0) singular: lowest point f=%.12g Hz)" % first_freq
        chk.notes.append("M(0) singular: DC values compared at the lowest sweep point")
    elif dc_hz is not None and dc_hz != 0.0:
        chk.fail("DC: M(0) is non-singular (rcond %.3g) but tbeta takes its DC values at "
                 "%.17g Hz" % (res["M"].rcond(), dc_hz))
        return
    check_reference_routes(chk, where, res, scale)
    chk.compare(where, "T", dc["T"], res["T"], scale, res)
    chk.compare(where, "T_det", dc["T"], res["T_det"], scale, res)
    if ckt.io is not None:
        for q in ("A", "A_inf", "A0"):
            chk.compare(where, q, dc[q], res[q], scale, res)


def check_file(tbeta, fname):
    """LoopCheck results for one netlist (one per loop)."""
    try:
        with open(fname, encoding="utf-8", errors="replace") as handle:
            ckt = read_netlist(handle.read())
        mna = Mna(ckt)
        if ckt.io is not None:
            mna.output()
    except NetlistError as exc:
        chk = LoopCheck(fname, "-")
        chk.fail("reference reader: %s" % exc)
        return [chk]
    if not ckt.loops:
        chk = LoopCheck(fname, "-")
        chk.fail("no .loop card: nothing to compare")
        return [chk]
    checks = []
    for index, loop in enumerate(ckt.loops):
        chk = LoopCheck(fname, loop)
        points = check_sweep(tbeta, fname, ckt, mna, loop, chk)
        dc_ref = loop_point(mna, loop, 0.0)
        scale = scales([p[2] for p in points] + [dc_ref])
        compare_rows(chk, ckt, points, scale)
        check_dc(tbeta, fname, ckt, mna, loop, index, chk, scale, ac_grid(ckt.ac)[0])
        checks.append(chk)
    return checks


def main(argv):
    usage = "usage: mna_check.py TBETA NETLIST... | mna_check.py --self-test"
    st = self_test()
    if st.failures:
        for text in st.failures:
            print("self-test FAIL: %s" % text)
        print("mna_check: self-test failed (%d of %d checks)" % (len(st.failures), st.count))
        return 1
    print("mna_check: self-test ok (%d checks against references.md and design.md)" % st.count)
    if argv == ["--self-test"]:
        return 0
    if len(argv) < 2 or argv[0].startswith("-"):
        print(usage, file=sys.stderr)
        return 2
    tbeta, files = argv[0], argv[1:]
    if not (os.path.isfile(tbeta) and os.access(tbeta, os.X_OK)):
        print("mna_check: %s is not an executable" % tbeta, file=sys.stderr)
        return 2
    unreadable = [f for f in files if not os.access(f, os.R_OK)]
    if unreadable:
        print("mna_check: cannot read %s" % " ".join(unreadable), file=sys.stderr)
        return 2
    passed = failed = 0
    for fname in files:
        for chk in check_file(tbeta, fname):
            if chk.report():
                passed += 1
            else:
                failed += 1
    print("mna_check: %d passed, %d failed" % (passed, failed))
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
