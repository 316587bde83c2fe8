#!/usr/bin/python3
"""tests/ref/winding_check.py: right-half-plane counts by the argument principle against QZ.

Usage:
    /usr/bin/python3 tests/ref/winding_check.py TBETA [NETLIST...]

src/winding.c counts the zeros of det M(s) (the circuit as it is) and of det M0(s)
(a .loop source at gain zero) in the right half-plane from the phase of det M(jw)
along the axis, which KLU's factors give, without eigenvalues; build/tests/tool_winding
(next to TBETA's folder, built by make check) prints its counts. Here the same
determinants' zeros come from the dense pencil G + sC of the independent MNA of
tests/ref/mna_check.py (sharing no code with tbeta), by scipy.linalg.eig (QZ) on the
balanced pencil, as tests/ref/stability_check.py does: for every netlist given, every
tests/stab/*.net (stab_rhp_open.net has an open-loop pole at +1e6 rad/s,
stab_threepole_unstable.net two closed-loop ones) and every tests/winding/*.net (a
right-half-plane pair open loop only, in both, a pair on the axis), and every loop,
  - the right-half-plane count (Re s > 1e-9 |s|, stability_check's rule),
  - the degree: the number of finite eigenvalues,
  - the zeros at the origin (the nullity of G, by numpy's rank of the scaled matrix),
  - the zeros on the axis away from the origin,
of the closed loop and of the open loop must agree exactly. The same counts must reach
the report above the pole limit (`tbeta report NET --json --pole-limit 0`: JSON
rhp_counts, method "argument principle"; axis = at the origin + elsewhere on the axis),
and its verdict must be the one QZ's closed-loop count gives (unstable with a zero of
det M right of the axis, else marginal with one on it, else stable), whatever the open
loop's count: the Nyquist verdict no longer assumes a stable open loop. Where the report
says the open loop has no right-half-plane pole because its blocks are passive (method
"passive blocks", src/passive.c), QZ must find none either, and the open loop's axis count,
when the report gives one, and the closed loop's count, when the check walk made one, must
agree as above.
Prints "winding_check: N passed, M failed"; exit 1 when any failed.
"""

import glob
import json
import importlib.util
import os
import subprocess
import sys

import numpy as np

HERE = os.path.dirname(os.path.abspath(__file__))
STAB = os.path.join(HERE, "..", "stab")
WINDING = os.path.join(HERE, "..", "winding")
spec = importlib.util.spec_from_file_location("mna_check", os.path.join(HERE, "mna_check.py"))
mna_check = importlib.util.module_from_spec(spec)
spec.loader.exec_module(mna_check)
# the dense pencil and its finite eigenvalues as stability_check computes them
spec = importlib.util.spec_from_file_location("stability_check", os.path.join(HERE, "stability_check.py"))
stability_check = importlib.util.module_from_spec(spec)
spec.loader.exec_module(stability_check)
finite_eigs = stability_check.finite_eigs
pencil = stability_check.pencil


def nullity(G):
    """Zeros of det(G + sC) at the origin: the nullity of G (numpy's rank of G with rows and
    then columns scaled to unit largest entry, so that stiff circuits do not look singular)."""
    A = np.array(G, dtype=float)
    A = A / np.maximum(np.abs(A).max(axis=1, keepdims=True), 1e-300)
    A = A / np.maximum(np.abs(A).max(axis=0, keepdims=True), 1e-300)
    return A.shape[0] - np.linalg.matrix_rank(A)


def classify(roots, at_origin):
    """(rhp, degree, at origin, on the axis away from the origin): the at_origin smallest
    roots are the origin's; of the others, Re s > 1e-9 |s| is right half-plane
    (stability_check's rule) and |Re s| <= 1e-9 |s| on the axis."""
    rest = sorted(roots, key=abs)[at_origin:]
    rhp = sum(1 for r in rest if r.real > 1e-9 * abs(r))
    axis = sum(1 for r in rest if abs(r.real) <= 1e-9 * abs(r))
    return rhp, len(roots), at_origin, axis


def tool_counts(tool, fname):
    out = subprocess.run([tool, fname], capture_output=True, text=True, check=False)
    if out.returncode != 0:
        raise RuntimeError("%s %s: exit %d: %s" % (tool, fname, out.returncode, out.stderr.strip()))
    counts = {}
    for line in out.stdout.splitlines():
        f = line.split()
        # NAME closed R D O A open R D O A evals N
        counts[f[0].lower()] = {"closed": f[2:6], "open": f[7:11]}
    return counts


def report_counts(tbeta, fname):
    """Each loop's JSON stability keys from `tbeta report NET --json --pole-limit 0`."""
    out = subprocess.run([tbeta, "report", fname, "--json", "--pole-limit", "0"], capture_output=True,
                         text=True, check=False)
    if out.returncode not in (0, 1):
        raise RuntimeError("%s: tbeta exit %d: %s" % (fname, out.returncode, out.stderr.strip()))
    return {lp["source"].lower(): lp for lp in json.loads(out.stdout)["loops"]}


def qz_verdict(cl):
    """The verdict of the closed-loop QZ count (rhp, degree, origin, axis)."""
    return "unstable" if cl[0] > 0 else "marginal" if cl[2] + cl[3] > 0 else "stable"


def check_report(where, loop, cl, ol):
    """The report's counts and verdict above the pole limit against QZ; a list of failures."""
    bad = []
    counts = loop["rhp_counts"]
    opened = counts["open_loop"]
    passive = opened is not None and opened["method"] == "passive blocks"
    for kind, want in (("closed_loop", cl), ("open_loop", ol)):
        got = counts[kind]
        have = None if got is None else (got["method"], got["rhp"], got["axis"])
        if kind == "open_loop" and passive:
            # P = 0 by passive blocks (src/passive.c): QZ must find no open-loop zero right of
            # the axis; the axis is counted only when the check walk ran
            if want[0] != 0 or got["rhp"] != 0 or got["axis"] not in (None, want[2] + want[3]):
                bad.append("%s open_loop: report count (method, rhp, axis) = %s, QZ (rhp, axis) = (%d, %d)"
                           % (where, have, want[0], want[2] + want[3]))
            continue
        if kind == "closed_loop" and passive and got is None:
            continue  # the check walk did not run or gave up: the verdict below still must agree
        if have != ("argument principle", want[0], want[2] + want[3]):
            bad.append("%s %s: report count (method, rhp, axis) = %s, QZ (rhp, axis) = (%d, %d)"
                       % (where, kind, have, want[0], want[2] + want[3]))
    if counts["closed_loop"] is not None and counts["closed_loop_degree"] != cl[1]:
        bad.append("%s: report degree %s, QZ %d" % (where, counts["closed_loop_degree"], cl[1]))
    if loop["verdict"] != qz_verdict(cl):
        bad.append("%s: report verdict %s above the pole limit, QZ's count says %s"
                   % (where, loop["verdict"], qz_verdict(cl)))
    return bad


def main(argv):
    if not argv:
        print("usage: winding_check.py TBETA [NETLIST...]", file=sys.stderr)
        return 2
    tool = os.path.join(os.path.dirname(os.path.abspath(argv[0])), "tests", "tool_winding")
    files = argv[1:] + sorted(glob.glob(os.path.join(STAB, "*.net"))) + sorted(glob.glob(os.path.join(WINDING, "*.net")))
    passed = failed = 0
    for fname in files:
        where = os.path.relpath(fname)
        try:
            with open(fname, encoding="utf-8", errors="replace") as handle:
                ckt = mna_check.read_netlist(handle.read())
            mna = mna_check.Mna(ckt)
            counts = tool_counts(tool, fname)
            report = report_counts(argv[0], fname)
        except (OSError, RuntimeError, ValueError, mna_check.NetlistError) as exc:
            failed += 1
            print("FAIL %s: %s" % (where, exc))
            continue
        G, C = pencil(mna)
        cl = classify(finite_eigs(G, C), nullity(G))
        for name, got in counts.items():
            G0, C0 = pencil(mna, {name: 0.0})
            ol = classify(finite_eigs(G0, C0), nullity(G0))
            for kind, want in (("closed", cl), ("open", ol)):
                have = tuple(int(x) if x != "-" else None for x in got[kind])
                if have == want:
                    passed += 1
                else:
                    failed += 1
                    print("FAIL %s %s %s: winding (rhp, degree, origin, axis) = %s, QZ %s"
                          % (where, name, kind, have, want))
            bad = check_report("%s %s" % (where, name), report[name], cl, ol) if name in report \
                else ["%s %s: no such loop in the report" % (where, name)]
            passed += not bad
            failed += len(bad)
            for line in bad:
                print("FAIL " + line)
        print("ok %s: %d loop(s), closed loop %d right-half-plane zero(s) of %d" % (where, len(counts), cl[0], cl[1]))
    print("winding_check: %d passed, %d failed" % (passed, failed))
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
