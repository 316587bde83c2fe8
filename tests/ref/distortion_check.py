#!/usr/bin/python3
"""tests/ref/distortion_check.py: the weakly nonlinear distortion of tbeta (.volterra) against a
brute-force harmonic balance, and the closed-loop series of a memoryless stage against a fit.

Usage:
    /usr/bin/python3 tests/ref/distortion_check.py TBETA [NETLIST...]

The NETLIST arguments (the suite passes every demo) are ignored: the circuits are those of
tests/dist/, which carry k2=/k3= coefficients. Shares no code with tbeta: its own reader of the
subset used there (R C L V E G F H with k2= k3=, .loop .io .volterra), its own dense MNA (numpy).

1. Series of a memoryless stage y = a1 x + a2 x^2 + a3 x^3 in a loop x = u - beta y: the loop
   equation is solved for y at 41 small inputs u (numpy roots of the cubic, the root nearest
   b1 u), a degree-7 polynomial is fitted, and its first three coefficients must equal
   b1 = a1/(1+T), b2 = a2/(1+T)^3, b3 = (a3 (1+T) - 2 a2^2 beta)/(1+T)^5 (T = a1 beta;
   P. Wambacq and W. Sansen, Distortion Analysis of Analog Integrated Circuits, 1998, the
   feedback chapter, from memory) to 1e-6 relative.
2. Harmonic balance: the nonlinear circuit driven by the .volterra tone (and by the two tones)
   is solved for its periodic steady state by successive substitution: every harmonic k of the
   linear part solved exactly with M(j k w), the nonlinear currents k2 x^2 + k3 x^3 of each
   source sampled in time (128 samples a period) and transformed back by the FFT, until the
   iterate moves by less than 1e-14 of the fundamental. The same with each .loop opened (its
   source driven by tbeta's reported drive in place of its controlling variable, the input at
   zero). HD2, HD3, IM2, IM3 from the spectrum must agree with tbeta's JSON within the
   truncation error of a third-order series. Each figure compared is the leading term of a
   series in the amplitude whose next term is two orders higher, so its relative error is of
   the order of the nonlinearity's own relative size at the amplitude reached there:
       rho = max over the sources of (k2 X/k)^2 + |k3| X^2/|k|,
   X the amplitude of the source's controlling variable at the fundamental (from the balance
   itself). The bound is 100 rho + 1e-9 (the factor covers the partial cancellations inside a
   loop, where the third-order output is a difference of the k3 and the interaction terms).
   And the difference must be that higher-order term: at a quarter of the amplitude it falls
   by at least 8 (ideally 16, as amp^2), unless it is already below 1e-9.
Prints one line per failure and a closing `distortion_check: N passed, M failed`.
"""

import json
import math
import subprocess
import sys
import glob
import re

import numpy as np

SUFFIX = {"f": 1e-15, "p": 1e-12, "n": 1e-9, "u": 1e-6, "m": 1e-3, "k": 1e3, "meg": 1e6, "g": 1e9, "t": 1e12}
SAMPLES = 128
passed = 0
failed = 0


def check(ok, what):
    global passed, failed
    if ok:
        passed += 1
    else:
        failed += 1
        print("FAIL " + what)


def value(tok):
    m = re.match(r"^([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)(meg|[fpnumkgt])?", tok.lower())
    return float(m.group(1)) * (SUFFIX[m.group(2)] if m.group(2) else 1.0)


def read(path):
    """Elements and directives of the subset used by tests/dist/."""
    ckt = {"el": [], "loops": [], "io": None, "volterra": {}}
    lines = open(path).read().splitlines()[1:]
    for line in lines:
        t = line.split(";")[0].split()
        if not t or t[0].startswith("*"):
            continue
        name = t[0].lower()
        if name == ".loop":
            ckt["loops"].append(t[1].lower())
        elif name == ".io":
            m = re.match(r"v\((\w+)\)", t[2].lower())
            ckt["io"] = (t[1].lower(), m.group(1))
        elif name == ".volterra":
            for kv in t[1:]:
                k, v = kv.split("=")
                ckt["volterra"][k.lower()] = value(v)
        elif name.startswith("."):
            continue
        else:
            keys = {k.lower(): value(v) for k, v in (kv.split("=") for kv in t if "=" in kv)}
            plain = [x for x in t if "=" not in x]
            ckt["el"].append({"name": name, "kind": name[0], "t": plain[1:], "k2": keys.get("k2", 0.0),
                              "k3": keys.get("k3", 0.0)})
    return ckt


class Mna:
    """Dense MNA: G + jwC, node unknowns then branch currents (V, L, E, H)."""

    def __init__(self, ckt, opened=None):
        self.nodes = {"0": -1, "gnd": -1}
        for e in ckt["el"]:
            pins = e["t"][:4] if e["kind"] in "eg" else e["t"][:2]
            for p in pins:
                p = p.lower()
                if p not in self.nodes:
                    self.nodes[p] = len([v for v in self.nodes.values() if v >= 0])
        nn = len([v for v in self.nodes.values() if v >= 0])
        self.branch = {}
        for e in ckt["el"]:
            if e["kind"] in "vleh":
                self.branch[e["name"]] = nn + len(self.branch)
        self.n = nn + len(self.branch)
        n = self.n
        self.G = np.zeros((n, n))
        self.C = np.zeros((n, n))
        self.b = np.zeros(n)
        self.src = []  # (u, v, k, k2, k3, opened)
        for e in ckt["el"]:
            self.stamp(e, ckt, opened)

    def node(self, name):
        return self.nodes[name.lower()]

    def vec(self, pairs):
        x = np.zeros(self.n)
        for i, c in pairs:
            if i >= 0:
                x[i] += c
        return x

    def stamp(self, e, ckt, opened):
        k, t = e["kind"], e["t"]
        a, b = self.node(t[0]), self.node(t[1])
        inc = self.vec([(a, 1), (b, -1)])
        if k in "rc":
            y = value(t[2])
            (self.G if k == "r" else self.C)[:, :] += (1 / y if k == "r" else y) * np.outer(inc, inc)
            return
        if k in "vleh":
            j = self.branch[e["name"]]
            self.G[:, j] += inc
            self.G[j, :] += inc
            if k == "v":
                if e["name"] == ckt["io"][0]:
                    self.b[j] = 1.0
            elif k == "l":
                self.C[j, j] -= value(t[2])
        if k in "eg":
            ctl = self.vec([(self.node(t[2]), 1), (self.node(t[3]), -1)])
            gain = value(t[4])
        if k in "fh":
            ctl = np.zeros(self.n)
            ctl[self.branch[t[2].lower()]] = 1.0
            gain = value(t[3])
        if k in "egfh":
            # the source's output y enters as +u y on the left: a current y from n+ to n- (G, F),
            # or the branch equation v(n+) - v(n-) - y = 0 (E, H)
            u = inc if k in "gf" else -np.eye(self.n)[self.branch[e["name"]]]
            is_open = e["name"] == opened
            if not is_open:
                self.G += gain * np.outer(u, ctl)
            self.src.append((u, ctl, gain, e["k2"], e["k3"], is_open))

    def M(self, w):
        return self.G + 1j * w * self.C


def balance(ckt, mna, tones, amp, drive, out):
    """Periodic steady state with the input (or, opened, the injected drive) at the given tones,
    multiples of a base frequency f0: harmonics[k] of every unknown, k = 0..SAMPLES/2."""
    f0 = math.gcd(*[int(round(f)) for f in tones])
    ks = [int(round(f / f0)) for f in tones]
    K = SAMPLES // 2
    assert 3 * max(ks) < K
    inv = [np.linalg.inv(mna.M(2 * math.pi * f0 * k)) for k in range(K + 1)]
    X = np.zeros((K + 1, mna.n), dtype=complex)
    t = np.arange(SAMPLES) / SAMPLES
    tone_t = sum(np.cos(2 * math.pi * k * t) for k in ks)
    B = np.zeros((K + 1, mna.n), dtype=complex)
    for k in ks:
        B[k] = mna.b * amp
    for it in range(400):
        x_t = np.fft.irfft(np.concatenate([X[:1], X[1:] / 2]) * SAMPLES, SAMPLES, axis=0)
        rhs = B.copy()
        for (u, v, k, k2, k3, is_open) in mna.src:
            xc = drive * tone_t if is_open else x_t @ v
            y = (k * xc if is_open else 0) + k2 * xc ** 2 + k3 * xc ** 3
            Y = np.fft.rfft(y) / SAMPLES
            Y[1:] *= 2
            rhs -= np.outer(Y, u)
        Xn = np.array([inv[k] @ rhs[k] for k in range(K + 1)])
        step = np.max(np.abs(Xn - X))
        X = Xn
        if step < 1e-14 * max(1e-300, np.max(np.abs(X[ks[0]]))):
            break
    rho = 0.0
    for (u, v, k, k2, k3, is_open) in mna.src:
        xa = drive if is_open else abs(X[ks[0]] @ v)
        if k != 0:
            rho = max(rho, (k2 * xa / k) ** 2 + abs(k3) * xa ** 2 / abs(k))
    y = X @ out
    return y, ks, rho


def hb_figures(ckt, mna, amp, drive, out):
    f1, f2 = ckt["volterra"]["freq"], ckt["volterra"].get("freq2", 1.1 * ckt["volterra"]["freq"])
    y, (k1,), rho = balance(ckt, mna, [f1], amp, drive, out)
    fig = {"hd2": abs(y[2 * k1]) / abs(y[k1]), "hd3": abs(y[3 * k1]) / abs(y[k1]), "rho": rho}
    y, (ka, kb), _ = balance(ckt, mna, [f1, f2], amp, drive, out)
    fig["im2_sum"] = abs(y[ka + kb]) / abs(y[ka])
    fig["im2_difference"] = abs(y[kb - ka]) / abs(y[ka])
    fig["im3"] = abs(y[2 * ka - kb]) / abs(y[ka])
    return fig


def tbeta_json(tbeta, path, scale):
    text = open(path).read()
    text = re.sub(r"amp=(\S+)", lambda m: "amp=%.17g" % (value(m.group(1)) * scale), text)
    tmp = "/tmp/distortion_check_%d.net" % abs(hash(path))
    open(tmp, "w").write(text)
    r = subprocess.run([tbeta, "report", tmp, "--json"], capture_output=True, text=True)
    if r.returncode != 0:
        raise RuntimeError(r.stderr)
    return json.loads(r.stdout)["distortion"]


def compare(tbeta, path):
    ckt = read(path)
    out_node = None
    errs = {}
    for scale in (1.0, 0.25):
        d = tbeta_json(tbeta, path, scale)
        amp = d["amp"]
        cases = [(None, d["closed"], amp)] + [(lp["source"].lower(), lp["open"], lp["open"]["drive"])
                                              for lp in d["loops"]]
        for opened, case, drive in cases:
            mna = Mna(ckt, opened)
            out_node = mna.node(ckt["io"][1])
            sel = np.zeros(mna.n)
            sel[out_node] = 1.0
            hb = hb_figures(ckt, mna, 0.0 if opened else amp, drive, sel)
            bound = 100 * hb["rho"] + 1e-9
            for key in ("hd2", "hd3", "im2_sum", "im2_difference", "im3"):
                want = hb[key]
                got = case[key]["ratio"]
                rel = abs(got - want) / want
                errs[(opened, key, scale)] = rel
                check(rel <= bound, "%s %s%s amp x%g: tbeta %.12g, harmonic balance %.12g (rel %.3g > %.3g)"
                      % (path, key, " opened at " + opened if opened else "", scale, got, want, rel, bound))
    # the difference is the higher-order term: it falls as amp^2
    for (opened, key, scale), rel in errs.items():
        if scale != 1.0:
            continue
        small = errs[(opened, key, 0.25)]
        check(rel < 1e-9 or small <= rel / 8,
              "%s %s%s: difference %.3g at amp, %.3g at amp/4 (want a fall of 8 or more)"
              % (path, key, " opened" if opened else "", rel, small))


def series_fit():
    a1, a2, a3, beta = 1000.0, 200.0, -5000.0, 0.1
    T = a1 * beta
    want = [a1 / (1 + T), a2 / (1 + T) ** 3, (a3 * (1 + T) - 2 * a2 ** 2 * beta) / (1 + T) ** 5]
    us = np.linspace(-0.02, 0.02, 41)
    ys = []
    for u in us:
        # y = a1 (u - beta y) + a2 (u - beta y)^2 + a3 (u - beta y)^3, as a cubic in x = u - beta y:
        # x = u - beta (a1 x + a2 x^2 + a3 x^3)
        roots = np.roots([beta * a3, beta * a2, 1 + beta * a1, -u])
        x = roots[np.argmin(np.abs(roots - u / (1 + T)))].real
        ys.append(a1 * x + a2 * x ** 2 + a3 * x ** 3)
    c = np.polynomial.polynomial.polyfit(us, ys, 7)
    for i, w in enumerate(want):
        check(abs(c[i + 1] - w) <= 1e-6 * abs(w), "series b%d: fit %.12g, closed form %.12g" % (i + 1, c[i + 1], w))


def main():
    tbeta = sys.argv[1]
    series_fit()
    for path in sorted(glob.glob("tests/dist/*.net")):
        compare(tbeta, path)
    print("distortion_check: %d passed, %d failed" % (passed, failed))
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
