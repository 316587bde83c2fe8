#!/usr/bin/python3
"""tests/ref/krylov_check.py: poles near a shift by Krylov-Schur against scipy's QZ.

Usage:
    /usr/bin/python3 tests/ref/krylov_check.py TBETA [NETLIST...]

src/krylov.c finds the natural frequencies of a circuit nearest a shift sigma = j 2 pi f
(the pencil G + sC, and the same with each .loop source at gain zero) by shift and
invert on KLU's factors, without the dense pencil; build/tests/tool_krylov (next to
TBETA's folder, built by make check) prints them. Here the same pencils come from the
independent MNA of tests/ref/mna_check.py and scipy.linalg.eig (QZ), as
tests/ref/stability_check.py computes them. For every netlist given, every tests/stab
and tests/winding netlist (open-loop right-half-plane pairs, an LC tank on the axis,
generated lines and a mesh of 300-400 unknowns), shifts at 0 and at the geometric
middle of the .ac range, the closed loop and every open loop:
  - every pole found must be a QZ eigenvalue, to 1e-7 of its size or, for an
    ill-conditioned one, to 100 kappa eta: eta the pencil's backward error the tool
    reports for it, kappa the eigenvalue's relative condition number
    ||x|| ||y|| (||G|| + |s| ||C||) / (|s| |y^H C x|) from scipy's right and left
    eigenvectors (the first-order bound of D. J. Higham and N. J. Higham, "Structured
    backward error and condition of generalized eigenvalue problems", SIAM J. Matrix
    Anal. Appl. 20(2), 1998, from memory): a triple pole of the demo three-stage
    amplifiers splits by about eps^(1/3): for a cluster of m QZ eigenvalues within
    1e-2 of each other the bound is at most 10 eta^(1/m) (the splitting of an m-fold
    defective eigenvalue by a perturbation eta, from memory), else at most 1e-3,
  - no QZ eigenvalue lies nearer the shift than the farthest one found without being
    found (the poles are the nearest ones),
  - a run that says it converged found as many as asked for (or every finite one not
    1e10 times farther from the shift than the nearest).
Prints "krylov_check: N passed, M failed"; exit 1 when any failed.
"""

import glob
import importlib.util
import math
import os
import subprocess
import sys

import numpy as np

HERE = os.path.dirname(os.path.abspath(__file__))
spec = importlib.util.spec_from_file_location("mna_check", os.path.join(HERE, "mna_check.py"))
mna_check = importlib.util.module_from_spec(spec)
spec.loader.exec_module(mna_check)
spec = importlib.util.spec_from_file_location("stability_check", os.path.join(HERE, "stability_check.py"))
stability_check = importlib.util.module_from_spec(spec)
spec.loader.exec_module(stability_check)

WANT = 6


def tool_runs(tool, fname, f):
    out = subprocess.run([tool, fname, repr(f), str(WANT)], capture_output=True, text=True, check=False)
    if out.returncode != 0:
        raise RuntimeError("%s %s: exit %d: %s" % (tool, fname, out.returncode, out.stderr.strip()))
    runs, lines = [], out.stdout.splitlines()
    i = 0
    while i < len(lines):
        h = lines[i].split()  # KIND NAME shift F count K converged C solves N
        count = int(h[5])
        poles = [(complex(float(x.split()[0]), float(x.split()[1])), float(x.split()[3]))
                 for x in lines[i + 1:i + 1 + count]]
        runs.append({"kind": h[0], "name": h[1].lower(), "shift": float(h[3]), "converged": h[7] == "1",
                     "poles": poles})
        i += 1 + count
    return runs


def conditions(G, C):
    """Finite eigenvalues of G + sC and each one's relative condition number."""
    eigs, vr, vl = stability_check.pencil_vectors(G, C)
    gn, cn = np.linalg.norm(G, 2), np.linalg.norm(C, 2)
    kappa = []
    for i, s in enumerate(eigs):
        x, y = vr[:, i], vl[:, i]
        d = abs(np.conj(y) @ C @ x) * max(abs(s), 1e-300)
        num = np.linalg.norm(x) * np.linalg.norm(y) * (gn + abs(s) * cn)
        kappa.append(num / d if d > num * 1e-300 else np.inf)
    return eigs, np.array(kappa)


def check_run(where, run, eigs, kappa):
    """A list of failures of one run against the QZ eigenvalues eigs (condition numbers kappa)."""
    sigma = 2j * math.pi * run["shift"]
    bad = []
    found = [p for p, _ in run["poles"]]

    def tol(i, eta):
        bound = 100.0 * kappa[i] * max(eta, 1e-16) if np.isfinite(kappa[i]) else np.inf
        m = int(np.sum(np.abs(eigs - eigs[i]) <= 1e-2 * abs(eigs[i])))
        cluster = 10.0 * max(eta, 1e-15) ** (1.0 / m) if m > 1 else 1e-3
        return abs(eigs[i]) * max(1e-7, min(bound, cluster)) + 1e-9 * abs(sigma)

    for s, eta in run["poles"]:
        i = int(np.argmin(np.abs(eigs - s))) if len(eigs) else None
        if i is None or abs(eigs[i] - s) > tol(i, eta):
            bad.append("%s: pole %s is no QZ eigenvalue (nearest %s)" % (where, s, None if i is None else eigs[i]))
    if found:
        reach = max(abs(s - sigma) for s in found)
        for i, e in enumerate(eigs):
            if abs(e - sigma) < 0.999 * reach and min(abs(e - s) for s in found) > tol(i, 1e-12):
                bad.append("%s: QZ eigenvalue %s is nearer the shift than poles found, and missed" % (where, e))
    # poles more than 1e10 times farther from the shift than the nearest are not near
    # (src/krylov.h, TB_KRYLOV_FAR): a converged run owes only the others
    near = [e for e in eigs if len(eigs) and abs(e - sigma) <= 1e10 * min(abs(eigs - sigma))]
    if run["converged"] and len(found) < min(WANT, len(near)):
        bad.append("%s: converged with %d poles of %d wanted" % (where, len(found), min(WANT, len(near))))
    return bad


def main(argv):
    if not argv:
        print("usage: krylov_check.py TBETA [NETLIST...]", file=sys.stderr)
        return 2
    tool = os.path.join(os.path.dirname(os.path.abspath(argv[0])), "tests", "tool_krylov")
    files = argv[1:] + sorted(glob.glob(os.path.join(HERE, "..", "stab", "*.net"))) \
        + sorted(glob.glob(os.path.join(HERE, "..", "winding", "*.net")))
    passed = failed = 0
    for fname in files:
        where = os.path.relpath(fname)
        try:
            with open(fname, encoding="utf-8", errors="replace") as handle:
                text = handle.read()
            ckt = mna_check.read_netlist(text)
            mna = mna_check.Mna(ckt)
            f_lo, f_hi = ckt.ac[2], ckt.ac[3]
        except (OSError, ValueError, mna_check.NetlistError) as exc:
            failed += 1
            print("FAIL %s: %s" % (where, exc))
            continue
        shifts = [0.0]
        if f_lo and f_hi:
            shifts.append(math.sqrt(f_lo * f_hi))
        for f in shifts:
            try:
                runs = tool_runs(tool, fname, f)
            except RuntimeError as exc:
                failed += 1
                print("FAIL %s: %s" % (where, exc))
                continue
            for run in runs:
                gains = None if run["kind"] == "closed" else {run["name"]: 0.0}
                G, C = stability_check.pencil(mna, gains)
                eigs, kappa = conditions(G, C)
                bad = check_run("%s %s %s near %.4g Hz" % (where, run["kind"], run["name"], run["shift"]), run,
                                eigs, kappa)
                passed += not bad
                failed += len(bad)
                for line in bad:
                    print("FAIL " + line)
        print("ok %s" % where)
    print("krylov_check: %d passed, %d failed" % (passed, failed))
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
