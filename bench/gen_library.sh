#!/bin/sh
# bench/gen_library.sh: writes the library benchmark: COUNT netlists of NMIN to NMAX nodes into DIR
# Usage: sh bench/gen_library.sh DIR [COUNT [NMIN [NMAX]]]     (defaults 1000, 10, 2000)
#
# Netlist i (0-based) is a ladder of VCCS-coupled RC sections (4 nodes of 100 ohm and 0.1 pF each,
# a 1 mS VCCS into each section, 1k load) closed by the loop GA, a follower with T(0) = 1000 and
# one dominant pole at 1 Hz (CDOM = 159.15 uF on section 1's last node), with
# round(NMIN * (NMAX/NMIN)^(i/(COUNT-1))) nodes, sizes spaced evenly in log between the two
# ends, on the grid .ac dec 10 1 1meg, and carries the expectations a library netlist would:
#   dc.T = 1000 (T(0) = k RL (gm RL)^(S-1) = 1000), dc.A = 1000/1001 (A_inf = 1, A0 = 0),
#   unity_hz near 1 kHz (fc = 1 Hz * sqrt(T0^2 - 1) = 999.9995 Hz, single-pole algebra),
#   a phase margin near 90 deg, and a stable verdict. Files spread over 10 folders.
set -eu
dir=${1:?usage: gen_library.sh DIR [COUNT [NMIN [NMAX]]]}
count=${2:-1000}
nmin=${3:-10}
nmax=${4:-2000}
for d in 0 1 2 3 4 5 6 7 8 9; do mkdir -p "$dir/group$d"; done
awk -v dir="$dir" -v count="$count" -v nmin="$nmin" -v nmax="$nmax" 'BEGIN {
    K = 4
    for (f = 0; f < count; f++) {
        nodes = int(nmin * exp(log(nmax / nmin) * (count > 1 ? f / (count - 1) : 0)) + 0.5)
        S = int((nodes - 1 + K - 1) / K)
        if (S < 1) S = 1
        out = S * K
        file = sprintf("%s/group%d/ladder_%04d.net", dir, f % 10, f)
        printf "Library benchmark ladder %d: %d sections of %d nodes, %d nodes, one loop\n", f, S, K, out + 1 > file
        print "VIN in 0 AC 1" > file
        n = 0
        for (s = 1; s <= S; s++) {
            first = n + 1
            if (s == 1)
                printf "GA 0 n%d in n%d 1\n", first, out > file
            else
                printf "G%d 0 n%d n%d 0 1m\n", s, first, first - 1 > file
            for (i = 0; i < K; i++) {
                n++
                printf "C%d n%d 0 0.1p\n", n, n > file
                if (i > 0)
                    printf "R%d n%d n%d 100\n", n, n - 1, n > file
            }
            printf "RL%d n%d 0 1k\n", s, n > file
            if (s == 1)
                printf "CDOM n%d 0 159.1549431u\n", n > file
        }
        print ".loop GA" > file
        printf ".io VIN v(n%d)\n", out > file
        print ".ac dec 10 1 1meg" > file
        print ".expect GA.dc.T = 1000 ±0.1%" > file
        print ".expect GA.dc.A = 0.999001 ±0.01%" > file
        print ".expect GA.unity_hz in 990 1010" > file
        print ".expect GA.phase_margin_deg >= 85" > file
        print ".expect GA.verdict = stable" > file
        print ".end" > file
        close(file)
    }
}'
