#!/usr/bin/python3
"""bench/plot.py: draws the benchmark's log-log plot (SVG, no plotting package) from bench/run.sh's results.

Usage:
    /usr/bin/python3 bench/plot.py RESULTS.txt OUT.svg

One panel per family (line, buffered, mesh): seconds per grid point against the number
of unknowns, both logarithmic, for the floor (bare KLU), tbeta sweep with one thread and
with one per core, the full report, and an older tbeta's sweep when the results have it.
Series differ by dash pattern and marker as well as by grey level, so the plot reads the
same printed in black and white.
"""

import math
import sys

FAMILIES = [("line", "weak-loop RC line"), ("buffered", "buffered line, T(0) = 2000"),
            ("mesh", "2-D RC mesh, corner to corner")]
# (key, label, stroke, dash, marker)
SERIES = [
    ("floor", "floor: bare KLU refactor + 1 solve", "#000000", "2,3", "circle"),
    ("sweep1", "tbeta sweep --jobs 1", "#000000", "", "square"),
    ("sweepN", "tbeta sweep, 2 threads", "#555555", "8,4", "triangle"),
    ("report", "tbeta NET (full report)", "#808080", "10,3,2,3", "diamond"),
    ("before", "sweep before this work", "#a0a0a0", "1,2", "cross"),
]
PANEL_W, PANEL_H = 250, 230
LEFT, TOP, GAP = 70, 70, 40
BOTTOM = 120


def read(path):
    rows = []
    with open(path, encoding="utf-8") as handle:
        for line in handle:
            if line.startswith("#") or not line.strip():
                continue
            f = line.split()
            points = float(f[2])
            row = {"family": f[0], "n": float(f[1]), "floor": float(f[4]) / points,
                   "sweep1": float(f[8]) / points, "sweepN": float(f[9]) / points}
            if f[10] != "-":
                row["report"] = float(f[10]) / points
            if len(f) > 17 and f[17] != "-":
                row["before"] = float(f[17]) * float(f[4]) / points
            rows.append(row)
    return rows


def marker(kind, x, y, colour):
    if kind == "circle":
        return '<circle cx="%.1f" cy="%.1f" r="3.5" fill="white" stroke="%s" stroke-width="1.5"/>' % (x, y, colour)
    if kind == "square":
        return '<rect x="%.1f" y="%.1f" width="7" height="7" fill="%s"/>' % (x - 3.5, y - 3.5, colour)
    if kind == "triangle":
        return '<path d="M%.1f %.1f l4 7 h-8 z" fill="%s"/>' % (x, y - 4.5, colour)
    if kind == "diamond":
        return '<path d="M%.1f %.1f l4.5 4.5 l-4.5 4.5 l-4.5 -4.5 z" fill="%s"/>' % (x, y - 4.5, colour)
    return ('<path d="M%.1f %.1f l7 7 m0 -7 l-7 7" stroke="%s" stroke-width="1.5"/>' % (x - 3.5, y - 3.5, colour))


def main(argv):
    if len(argv) != 2:
        print("usage: plot.py RESULTS.txt OUT.svg", file=sys.stderr)
        return 2
    rows = read(argv[0])
    ys = [r[k] for r in rows for k, *_ in SERIES if k in r]
    xs = [r["n"] for r in rows]
    x0, x1 = math.floor(math.log10(min(xs))) - 0.3, math.ceil(math.log10(max(xs))) + 0.3
    y0, y1 = math.floor(math.log10(min(ys))), math.ceil(math.log10(max(ys)))
    width = LEFT + 3 * PANEL_W + 2 * GAP + 20
    height = TOP + PANEL_H + BOTTOM
    out = ['<svg xmlns="http://www.w3.org/2000/svg" width="%d" height="%d" font-family="sans-serif" '
           'font-size="12">' % (width, height),
           '<rect width="100%" height="100%" fill="white"/>',
           '<text x="%d" y="24" font-size="15">tbeta against the KLU floor: wall-clock seconds per grid point '
           '(medians, end to end)</text>' % LEFT]
    for p, (fam, title) in enumerate(FAMILIES):
        left = LEFT + p * (PANEL_W + GAP)

        def px(v):
            return left + (math.log10(v) - x0) / (x1 - x0) * PANEL_W

        def py(v):
            return TOP + (y1 - math.log10(v)) / (y1 - y0) * PANEL_H

        out.append('<text x="%d" y="%d" font-size="13">%s</text>' % (left, TOP - 10, title))
        out.append('<rect x="%d" y="%d" width="%d" height="%d" fill="none" stroke="black"/>'
                   % (left, TOP, PANEL_W, PANEL_H))
        for e in range(math.ceil(x0), math.floor(x1) + 1):
            x = px(10 ** e)
            out.append('<line x1="%.1f" y1="%d" x2="%.1f" y2="%d" stroke="#dddddd"/>' % (x, TOP, x, TOP + PANEL_H))
            out.append('<text x="%.1f" y="%d" text-anchor="middle">10<tspan dy="-5" font-size="9">%d</tspan>'
                       '</text>' % (x, TOP + PANEL_H + 16, e))
        for e in range(y0, y1 + 1):
            y = py(10 ** e)
            out.append('<line x1="%d" y1="%.1f" x2="%d" y2="%.1f" stroke="#dddddd"/>' % (left, y, left + PANEL_W, y))
            if p == 0:
                out.append('<text x="%d" y="%.1f" text-anchor="end">10<tspan dy="-5" font-size="9">%d</tspan>'
                           '</text>' % (left - 6, y + 4, e))
        out.append('<text x="%d" y="%d" text-anchor="middle">unknowns</text>'
                   % (left + PANEL_W // 2, TOP + PANEL_H + 34))
        fam_rows = sorted((r for r in rows if r["family"] == fam), key=lambda r: r["n"])
        for key, _, colour, dash, kind in SERIES:
            pts = [(px(r["n"]), py(r[key])) for r in fam_rows if key in r]
            if len(pts) > 1:
                path = " ".join("%s%.1f %.1f" % ("M" if i == 0 else "L", x, y) for i, (x, y) in enumerate(pts))
                out.append('<path d="%s" fill="none" stroke="%s" stroke-width="1.6"%s/>'
                           % (path, colour, ' stroke-dasharray="%s"' % dash if dash else ""))
            out.extend(marker(kind, x, y, colour) for x, y in pts)
    out.append('<text x="%d" y="%d" transform="rotate(-90 %d %d)" text-anchor="middle">seconds per grid point'
               '</text>' % (18, TOP + PANEL_H // 2, 18, TOP + PANEL_H // 2))
    shown = [s for s in SERIES if any(s[0] in r for r in rows)]
    for i, (key, label, colour, dash, kind) in enumerate(shown):
        x = LEFT + (i % 3) * 300
        y = TOP + PANEL_H + 62 + (i // 3) * 20
        out.append('<line x1="%d" y1="%d" x2="%d" y2="%d" stroke="%s" stroke-width="1.6"%s/>'
                   % (x, y, x + 36, y, colour, ' stroke-dasharray="%s"' % dash if dash else ""))
        out.append(marker(kind, x + 18, y, colour))
        out.append('<text x="%d" y="%d">%s</text>' % (x + 44, y + 4, label))
    out.append("</svg>")
    with open(argv[1], "w", encoding="utf-8") as handle:
        handle.write("\n".join(out) + "\n")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
