#!/usr/bin/env python3
# bench/step_compare.py: the step figures and samples of two tbeta builds, compared within their own error estimates
# Usage: python3 bench/step_compare.py OLD_TBETA NEW_TBETA NETLIST...
#
# For every netlist with a step response, both builds run `tbeta report NET --json` twice:
# as they are, and with --pole-limit 0 (the time-stepping route whatever the size). The
# figures must agree within the sum of the two stated error estimates e (relative to the
# waveform's scale, the larger of |A(0)| and the largest |y|):
#   final value    the same DC solution: 1e-9 relative
#   peak, overshoot |dy| <= e scale (the peak's value; the overshoot in percent of A(0))
#   rise, settling |dt| <= e scale / |y'(t)| + 1e-9 t, y' from the old build's samples
#                  around t (a level crossing moves by the value error over the slope)
#   samples        where both builds sampled the same instant, |dy| <= e scale
# Prints one line a case and "step_compare: N cases, M failed"; exits 1 when any failed.
import csv
import io
import json
import subprocess
import sys


def run(tbeta, net, extra):
    rep = subprocess.run([tbeta, "report", net, "--json", "--jobs", "1"] + extra, capture_output=True, text=True)
    if rep.returncode not in (0, 1):
        return None, None
    step = json.loads(rep.stdout).get("step_response") or {}
    if not step.get("computed"):
        return step, None
    tab = subprocess.run([tbeta, "step", net, "--csv", "--jobs", "1"] + extra, capture_output=True, text=True)
    rows = list(csv.reader(io.StringIO(tab.stdout)))[1:] if tab.returncode in (0, 1) else []
    return step, [(float(r[0]), float(r[1])) for r in rows]


def slope_at(samples, t):
    for k in range(1, len(samples)):
        if samples[k][0] >= t:
            (t0, y0), (t1, y1) = samples[k - 1], samples[k]
            return abs((y1 - y0) / (t1 - t0)) if t1 > t0 else 0.0
    return 0.0


def compare(old, new, old_y, new_y):
    """Returns a list of complaints (empty: within the estimates)."""
    bad = []
    e = old.get("error_estimate", 0) + new.get("error_estimate", 0)
    scale = max(abs(old.get("final_value") or 0), max((abs(y) for _, y in old_y), default=0))
    tol_y = e * scale + 1e-15 * scale
    if old.get("method") != new.get("method"):
        bad.append("method %r -> %r" % (old.get("method"), new.get("method")))
    fa, fb = old.get("final_value"), new.get("final_value")
    if (fa is None) != (fb is None) or (fa is not None and abs(fa - fb) > 1e-9 * abs(fa) + 1e-300):
        bad.append("final value %r -> %r" % (fa, fb))
    for key in ("peak_value", "overshoot_pct", "rise_s", "settling_s", "why_no_figures"):
        if (old.get(key) is None) != (new.get(key) is None):
            bad.append("%s present in one build only" % key)
    if old.get("peak_value") is not None and new.get("peak_value") is not None:
        if abs(old["peak_value"] - new["peak_value"]) > tol_y:
            bad.append("peak %r -> %r" % (old["peak_value"], new["peak_value"]))
        if fa and old.get("overshoot_pct") is not None and abs(old["overshoot_pct"] - new["overshoot_pct"]) > 100 * tol_y / abs(fa):
            bad.append("overshoot %r -> %r" % (old["overshoot_pct"], new["overshoot_pct"]))
    for key in ("rise_s", "settling_s"):
        if old.get(key) is not None and new.get(key) is not None:
            t = old[key]
            # the crossing's slope: for the rise the 10 % and 90 % crossings both move; the
            # steeper of the two bounds the shift less well, so take the smaller slope seen
            s = slope_at(old_y, t) if key == "settling_s" else 0.0
            if key == "rise_s":
                s = min((slope_at(old_y, tt) for tt in crossings(old_y, fa)), default=0.0)
            allow = (2 * tol_y / s if s > 0 else float("inf")) + 1e-9 * abs(t)
            if abs(old[key] - new[key]) > allow:
                bad.append("%s %r -> %r (allowed %.3g)" % (key, old[key], new[key], allow))
    same = {t: y for t, y in old_y}
    worst = 0.0
    for t, y in new_y:
        if t in same:
            worst = max(worst, abs(y - same[t]))
    if worst > tol_y:
        bad.append("samples differ by %.3g > %.3g" % (worst, tol_y))
    return bad


def crossings(samples, final):
    """The first instants at 10 % and 90 % of the final value."""
    out = []
    for level in (0.1, 0.9):
        for t, y in samples:
            if final and y / final >= level:
                out.append(t)
                break
    return out


def main():
    if len(sys.argv) < 4:
        print(__doc__ or "usage: step_compare.py OLD_TBETA NEW_TBETA NETLIST...", file=sys.stderr)
        return 2
    old_bin, new_bin, nets = sys.argv[1], sys.argv[2], sys.argv[3:]
    cases = failed = 0
    for net in nets:
        for extra in ([], ["--pole-limit", "0"]):
            old, old_y = run(old_bin, net, extra)
            new, new_y = run(new_bin, net, extra)
            if old is None and new is None:
                continue
            label = "%s%s" % (net, " --pole-limit 0" if extra else "")
            if old_y is None and new_y is None:
                if (old or {}).get("why_absent") != (new or {}).get("why_absent"):
                    cases += 1
                    failed += 1
                    print("FAIL %s: absent for another reason" % label)
                continue
            cases += 1
            bad = ["computed by one build only"] if old_y is None or new_y is None else compare(old, new, old_y, new_y)
            failed += bool(bad)
            print("%s %s: %s" % ("FAIL" if bad else "ok  ", label,
                                 "; ".join(bad) if bad else "error estimate %.2g -> %.2g, %d -> %d samples" %
                                 (old["error_estimate"], new["error_estimate"], len(old_y), len(new_y))))
    print("step_compare: %d cases, %d failed" % (cases, failed))
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
