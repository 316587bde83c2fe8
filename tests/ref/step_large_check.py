#!/usr/bin/python3
"""tests/ref/step_large_check.py: the time-stepped step response above the pole limit against an exact reference.

Usage:
    /usr/bin/python3 tests/ref/step_large_check.py TBETA [ignored...]

Writes two netlists of about 1000 unknowns with bench/gen_family.sh (a weak-loop RC
line and a 2-D RC mesh with a loop from corner to corner, 78 % overshoot: our own
benchmark families; the buffered family's unloaded buffers make the algebraic part
singular for the reduction below), more than tbeta's default pole limit of 500,
so that tbeta integrates by TR-BDF2 with error control. The reference is
step_check.py's index-1 reduction of the independent MNA (mna_check.py), z' = A z + B,
y = Cy z + D, solved exactly through the eigenvalues of A:

    y(t) = D + sum_k (Cy v_k)(u_k' B) (e^(l_k t) - 1)/l_k

(A = V diag(l) V^-1, u_k' the rows of V^-1; the forced response of a linear system
with z(0) = 0, common practice), checked first against scipy.linalg.expm of the
augmented matrix [[A, B], [0, 0]] at a few instants (C. Moler and C. Van Loan,
"Nineteen dubious ways to compute the exponential of a matrix", 2003, from memory).
Then, as step_check.py:
  - every sample of tbeta step NET --csv within 1e-3 of the final value, and within
    twice tbeta's own stated error estimate plus 1e-6 (the estimate must not
    understate the error by more);
  - tbeta report NET --json, step_response: final value (1e-9), overshoot (0.5
    percentage points), 10-90 % rise and 2 % settling time (2 %), the reference's
    figures found on a grid of its own and refined by brentq on the exact y(t).
Prints one line per netlist and "step_large_check: N passed, M failed"; exit 1 on failure.
"""

import math
import os
import subprocess
import sys
import tempfile

import numpy as np
import scipy.optimize

HERE = os.path.dirname(os.path.abspath(__file__))
GEN = os.path.join(HERE, "..", "..", "bench", "gen_family.sh")
sys.path.insert(0, HERE)
import step_check  # noqa: E402  (the reduction, the tolerances and its loader of the other checks)

Checks = step_check.Checks

CASES = [("line", 1000, "dec 10 1 1g"), ("mesh", 1000, "dec 10 1 1g")]


class Modes:
    """y(t) of the reduced system through the eigenvalues of A."""

    def __init__(self, red):
        lam, V = np.linalg.eig(red.A)
        self.lam = lam
        self.w = red.Cy @ V
        self.u = np.linalg.solve(V, red.B.astype(complex))
        self.D = red.D
        self.final = red.final

    def y(self, t):
        t = np.atleast_1d(np.asarray(t, dtype=float))
        lt = np.outer(t, self.lam)
        return self.D + np.real(np.expm1(lt) @ (self.w * self.u / self.lam))


def figures(modes, t_end):
    final = modes.final
    grid = np.unique(np.concatenate([np.linspace(0.0, 2 * t_end, 20001),
                                     np.logspace(math.log10(t_end) - 8, math.log10(t_end) + 2, 4001)]))
    z = modes.y(grid) / final

    def zf(t):
        return float(modes.y(t)[0]) / final

    k = int(np.argmax(z))
    peak = z[k]
    if 0 < k < len(grid) - 1:
        res = scipy.optimize.minimize_scalar(lambda t: -zf(t), bounds=(grid[k - 1], grid[k + 1]), method="bounded",
                                             options={"xatol": 1e-14 * grid[k]})
        peak = max(peak, -res.fun)

    def reach(level):
        i = int(np.argmax(z >= level))
        if z[i] < level:
            return None
        return 0.0 if i == 0 else scipy.optimize.brentq(lambda t: zf(t) - level, grid[i - 1], grid[i], xtol=1e-15)

    t10, t90 = reach(0.1), reach(0.9)
    out = np.nonzero(np.abs(z - 1) > 0.02)[0]
    settle = 0.0
    if len(out):
        i = out[-1]
        settle = scipy.optimize.brentq(lambda t: abs(zf(t) - 1) - 0.02, grid[i], grid[i + 1], xtol=1e-15)
    return max(0.0, 100 * (peak - 1)), (t90 - t10 if t10 is not None and t90 is not None else None), settle


def check_case(chk, tbeta, fname):
    where = os.path.basename(fname)
    red = step_check.reduce_netlist(fname)
    modes = Modes(red)
    rows, doc = step_check.run_tbeta(tbeta, fname, [])
    step = doc["step_response"]
    chk.expect(step["computed"] and step["method"].startswith("TR-BDF2"),
               "%s: expected the time-stepped response, got %r" % (where, step.get("method")))
    if rows is None:
        return
    t, y = rows[:, 0], rows[:, 1]
    final = modes.final
    size = max(abs(final), np.abs(y).max())
    # the eigenvalue route against the matrix exponential at a few of tbeta's instants
    for tk in t[[len(t) // 4, len(t) // 2, 3 * len(t) // 4, -1]]:
        exact = red.at(0.0, np.concatenate([np.zeros(red.r), [1.0]]), tk)
        chk.expect(abs(exact - modes.y(tk)[0]) <= 1e-8 * size,
                   "%s: eigenvalues and expm differ at %g s: %r, %r" % (where, tk, modes.y(tk)[0], exact))
    chk.expect(abs(step["final_value"] - final) <= 1e-9 * abs(final),
               "%s: final value %r, reference %r" % (where, step["final_value"], final))
    err = np.abs(y - modes.y(t)).max() / size
    chk.expect(err <= step_check.WAVE_TOL, "%s: samples off the reference by %.3g" % (where, err))
    chk.expect(err <= 2 * step["error_estimate"] + 1e-6,
               "%s: samples off by %.3g, more than twice the stated estimate %.3g" % (where, err, step["error_estimate"]))
    ov, rise, settle = figures(modes, step["t_end_s"])
    chk.expect(abs(step["overshoot_pct"] - ov) <= step_check.OVERSHOOT_TOL,
               "%s: overshoot %r %%, reference %r %%" % (where, step["overshoot_pct"], ov))
    chk.expect(rise is not None and step_check.rel(step["rise_s"], rise) <= step_check.TIME_TOL,
               "%s: rise %r s, reference %r s" % (where, step["rise_s"], rise))
    chk.expect(step_check.rel(step["settling_s"], settle) <= step_check.TIME_TOL,
               "%s: settling %r s, reference %r s" % (where, step["settling_s"], settle))
    print("ok %s: %d samples, off by %.2g (estimate %.2g); overshoot %.4f %% (ref %.4f), rise %.6g s (ref %.6g), "
          "settling %.6g s (ref %.6g)" % (where, len(t), err, step["error_estimate"], step["overshoot_pct"], ov,
                                          step["rise_s"], rise or 0, step["settling_s"], settle))


def main(argv):
    if not argv:
        print("usage: step_large_check.py TBETA", file=sys.stderr)
        return 2
    tbeta = argv[0]
    chk = Checks()
    with tempfile.TemporaryDirectory() as tmp:
        for family, unknowns, ac in CASES:
            fname = os.path.join(tmp, "%s_%d.net" % (family, unknowns))
            with open(fname, "w", encoding="utf-8") as handle:
                subprocess.run(["sh", GEN, family, str(unknowns), ac], stdout=handle, check=True)
            try:
                check_case(chk, tbeta, fname)
            except (OSError, RuntimeError, KeyError, TypeError, ValueError, IndexError,
                    np.linalg.LinAlgError) as exc:
                chk.expect(False, "%s: %s" % (fname, exc))
    print("step_large_check: %d passed, %d failed" % (chk.passed, chk.failed))
    return 1 if chk.failed else 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
