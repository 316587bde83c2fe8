#!/usr/bin/env python3
"""tests/ref/spread_report_check.py: the spread part of `tbeta report --json` against the outside.

1. tests/spread/corners_twostage.net (two real poles, loop at G1, unity-gain follower): the
   report's corners against spread_check.py's brute-force enumeration of the .spread extremes
   with the closed form of the loop gain (Bode 1945, Black 1934), and each figure's worst case
   and the corner that produced it against the enumeration's minimum.
2. The same netlist's sensitivities at chosen frequencies (--sens-at) against the closed form
   of the normalized sensitivity of T = gm1 RS1/(1 + s RS1 CS1) * gm2 RS2/(1 + s RS2 CS2):
   d ln T/d ln CS1 = -s t1/(1 + s t1), d ln T/d ln RS1 = 1/(1 + s t1) (likewise CS2, RS2 with t2),
   d ln T/d ln G1 = d ln T/d ln G2 = d ln T/d ln E1 = 1; |T| moves by the real part (%/%),
   its phase by the imaginary part (180/pi/100 degrees per %).
3. The Monte Carlo of docs/examples/spread_buffer.net in the report against numpy and scipy
   from its own runs (spread_check.statistics_mismatches: mean, sigma, percentiles,
   correlations, worst cases, yield and its Wilson interval).
4. Consistency: every spread object of the report equals `tbeta spread --json` for the same
   netlist, mode and seed (less the tool, netlist and caution); the report is byte-identical for
   --jobs 1 and 3; no NaN or Infinity anywhere; the report without its spread part (--no-spread)
   is the report with it less the "spread" key, and a netlist without cards has no spread key.
Usage: spread_report_check.py TBETA [netlists...] (the netlists are checked for rule 4's last part).
"""
import json
import math
import os
import re
import subprocess
import sys

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import spread_check  # noqa: E402  the enumeration and the statistics checks

DEMO = "docs/examples/spread_buffer.net"
WHO = "spread_report_check"


def strict_json(text):
    def refuse(name):
        raise ValueError("non-finite number %s in the JSON" % name)
    return json.loads(text, parse_constant=refuse)


def run(tbeta, *args):
    out = subprocess.run([tbeta, *args], capture_output=True, text=True)
    if out.returncode not in (0, 1):
        raise RuntimeError("%s %s: exit %d: %s" % (tbeta, " ".join(args), out.returncode, out.stderr))
    return out.stdout


def check_corners(doc):
    """The report's corners of corners_twostage.net against the enumeration."""
    bad = 0
    corners = doc["spread"]["corners"]
    runs = corners["runs"]
    ends = [(spread_check.RS1 * 0.95, spread_check.RS1 * 1.05), (spread_check.CS1 * 0.94, spread_check.CS1 * 1.06),
            (5e-3, 20e-3), (spread_check.CS2 * 0.9, spread_check.CS2 * 1.1)]
    import itertools
    want = {spread_check.key(c): c for c in itertools.product(*ends)}
    nominal = (spread_check.RS1, spread_check.CS1, spread_check.G2, spread_check.CS2)
    want[spread_check.key(nominal)] = nominal
    got = {spread_check.key((r["values"]["res"], r["values"]["CS1"], r["values"]["G2"], r["values"]["CS2"])): i
           for i, r in enumerate(runs)}
    if set(got) != set(want):
        print("%s: the report ran %d corners, the enumeration has %d" % (WHO, len(runs), len(want)))
        return 1
    tol = {"dc.T": 1e-9, "unity_hz": 1e-7, "phase_margin_deg": 1e-5}
    for name, t in tol.items():
        ref = {k: spread_check.figures(*v)[name] for k, v in want.items()}
        for k, i in got.items():
            x = runs[i]["loops"]["G1"][name]
            scale = abs(ref[k]) if name != "phase_margin_deg" else 1.0
            if x is None or abs(x - ref[k]) > t * scale:
                print("%s: corner %s %s: report %r, closed form %r" % (WHO, k, name, x, ref[k]))
                bad += 1
        if name == "unity_hz":
            continue  # a frequency has no worse direction: no worst case
        worst_key = min(ref, key=ref.get)  # lower is worse for the loop gain and the phase margin
        st = corners["statistics"]["G1"][name]
        scale = abs(ref[worst_key]) if name != "phase_margin_deg" else 1.0
        if st["worst"] is None or abs(st["worst"] - ref[worst_key]) > t * scale or st["worst_run"] != got[worst_key]:
            print("%s: worst %s: report %r at run %r, enumeration %r at run %r"
                  % (WHO, name, st["worst"], st["worst_run"], ref[worst_key], got[worst_key]))
            bad += 1
    print("%s: %d corners of the report against the enumeration, worst cases and their corners, %d mismatches"
          % (WHO, len(runs), bad))
    return bad


def check_sens_at(doc, freqs):
    """--sens-at of corners_twostage.net against the closed form."""
    bad = 0
    t1 = spread_check.RS1 * spread_check.CS1
    t2 = spread_check.RS2 * spread_check.CS2
    for entry, f in zip(doc["sensitivities_at"], freqs):
        s = 2j * math.pi * f
        want = {"CS1": -s * t1 / (1 + s * t1), "CS2": -s * t2 / (1 + s * t2), "RS1": 1 / (1 + s * t1),
                "RS2": 1 / (1 + s * t2), "G2": 1 + 0j, "G1": 1 + 0j, "E1": 1 + 0j}
        elements = {e["element"]: e for e in entry["loops"]["G1"]["elements"]}
        if abs(entry["hz"] - f) > 0:
            bad += 1
        for name, d in want.items():
            e = elements[name]
            phase = d.imag * 180 / math.pi / 100
            if abs(e["T_mag"] - d.real) > 1e-9 or abs(e["T_phase_deg_per_pct"] - phase) > 1e-9:
                print("%s: at %g Hz, %s: report %r, %r; closed form %r, %r"
                      % (WHO, f, name, e["T_mag"], e["T_phase_deg_per_pct"], d.real, phase))
                bad += 1
        # ranked by |T|: the first named is the one with the largest |real part|
        ranked = sorted(want, key=lambda n: -abs(want[n].real))
        top = entry["loops"]["G1"]["T_mag_set_by"][0]
        if abs(abs(want[top].real) - abs(want[ranked[0]].real)) > 1e-9:
            print("%s: at %g Hz |T| set first by %s, the closed form says %s" % (WHO, f, top, ranked[0]))
            bad += 1
    print("%s: sensitivities at %d frequencies against the closed form, %d mismatches" % (WHO, len(freqs), bad))
    return bad


def check_consistency(tbeta, argv_netlists):
    bad = 0
    args = ["report", DEMO, "--json", "--samples", "40", "--seed", "7"]
    one = run(tbeta, *args, "--jobs", "1")
    three = run(tbeta, *args, "--jobs", "3")
    if one != three:
        print("%s: the report differs between --jobs 1 and --jobs 3" % WHO)
        bad += 1
    doc = strict_json(one)
    text = run(tbeta, "report", DEMO, "--samples", "40", "--seed", "7", "--sens-at", "1meg")
    if re.search(r"\b(nan|inf|infinity)\b", text, re.IGNORECASE):
        print("%s: NaN or Inf in the text report" % WHO)
        bad += 1
    modes = {"scan": ["--scan"], "corners": ["--corners"], "monte_carlo": ["--samples", "40", "--seed", "7"]}
    for key, mode in modes.items():
        alone = strict_json(run(tbeta, "spread", DEMO, *mode, "--json", "--jobs", "2"))
        for k in ("tbeta", "netlist", "caution"):
            alone.pop(k)
        if alone != doc["spread"][key]:
            print("%s: the report's spread.%s differs from tbeta spread %s --json" % (WHO, key, " ".join(mode)))
            bad += 1
    bad += spread_check.statistics_mismatches(doc["spread"]["monte_carlo"], WHO)
    without = strict_json(run(tbeta, "report", DEMO, "--json", "--no-spread"))
    if without.pop("spread", "absent") is not None:
        print("%s: --no-spread should leave \"spread\": null" % WHO)
        bad += 1
    doc.pop("spread")
    if without != doc:
        print("%s: the spread part changed more of the report than its own key" % WHO)
        bad += 1
    for net in argv_netlists:
        with open(net, encoding="utf-8", errors="replace") as f:
            if any(line.lower().startswith((".spread", ".scan")) for line in f):
                continue
        out = subprocess.run([tbeta, "report", net, "--json"], capture_output=True, text=True)
        if out.returncode in (0, 1) and ("\"spread\"" in out.stdout or "\"sensitivities_at\"" in out.stdout):
            print("%s: %s has no spread card, yet its report has a spread part" % (WHO, net))
            bad += 1
    print("%s: the report's spread part against tbeta spread, --jobs, --no-spread and %d netlists without cards, "
          "%d mismatches" % (WHO, len(argv_netlists), bad))
    return bad


def main():
    tbeta = sys.argv[1]
    freqs = [0.0, 1e3, 3e5]
    doc = strict_json(run(tbeta, "report", spread_check.NET, "--json", "--samples", "0", "--sens-at",
                          ",".join("%g" % f for f in freqs)))
    bad = check_corners(doc)
    if "monte_carlo" in doc["spread"]:
        print("%s: --samples 0 should run no Monte Carlo" % WHO)
        bad += 1
    bad += check_sens_at(doc, freqs)
    bad += check_consistency(tbeta, sys.argv[2:])
    return 1 if bad else 0


if __name__ == "__main__":
    sys.exit(main())
