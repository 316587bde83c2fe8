#!/bin/sh
# bench/gen_ladder.sh: writes the benchmark netlist, an RC ladder of VCCS-coupled sections closed by one feedback loop
# Usage: sh bench/gen_ladder.sh NODES [AC_SPEC] > FILE
#   NODES    at least this many circuit nodes (ground not counted)
#   AC_SPEC  the .ac grid, default "dec 50 1 9.99k": floor(50*log10(9990)) + 1 = 200 points
#
# The circuit (invented for the benchmark):
#   in, out ── GA (1 S, .loop) ──> section 1 ── G (1 mS) ──> section 2 ── ... ──> section S
#   Each section has 4 nodes, 100 ohm series resistors between them, 0.1 pF from every
#   node to ground and a 1k load on its last node. A 1 mS VCCS driven by the previous
#   section's last node pushes current into a section's first node, so every section has
#   a DC voltage gain of gm*RL = 1e-3*1e3 = 1. Section 1's last node also carries
#   CDOM = 159.1549431 uF, a dominant pole at 1/(2*pi*1k*CDOM) = 1.000 Hz. The output is
#   the last node of section S.
#   GA, the loop's gain element, pushes k*V(in, out) into the first node: a follower with
#   negative feedback whose controlling variable is the error V(in) - V(out).
# Expected values (single-pole algebra; the sections' own poles are above 100 MHz):
#   T(0) = k * RL * (gm*RL)^(S-1) = 1 * 1k * 1 = 1000, T(f) ~ 1000/(1 + j f/1Hz),
#   A_inf = 1 (nullor: V(in) - V(out) = 0), A0 = 0 (no path but through GA),
#   A(0) = 1000/1001.
# Well posed: with GA at zero the matrix is block lower triangular, each diagonal block
# an RC network with every node tied to ground through resistors (non-singular at every
# frequency, DC included); det M = det M0 * (1 + T), and 1 + T != 0 because |T| falls
# through 1 near 1 kHz while the phase of T is still near -90 degrees.
set -eu
nodes=${1:?usage: gen_ladder.sh NODES [AC_SPEC]}
ac=${2:-dec 50 1 9.99k}
awk -v nodes="$nodes" -v ac="$ac" 'BEGIN {
    K = 4                                   # nodes per section
    S = int((nodes - 1 + K - 1) / K)        # sections; "in" is the remaining node
    if (S < 1) S = 1
    out = S * K
    printf "RC/VCCS ladder benchmark: %d sections of %d nodes, %d nodes in all, one loop\n", S, K, out + 1
    print "VIN in 0 AC 1"
    n = 0
    for (s = 1; s <= S; s++) {
        first = n + 1
        if (s == 1)
            printf "GA 0 n%d in n%d 1\n", first, out
        else
            printf "G%d 0 n%d n%d 0 1m\n", s, first, first - 1
        for (i = 0; i < K; i++) {
            n++
            printf "C%d n%d 0 0.1p\n", n, n
            if (i > 0)
                printf "R%d n%d n%d 100\n", n, n - 1, n
        }
        printf "RL%d n%d 0 1k\n", s, n
        if (s == 1)
            printf "CDOM n%d 0 159.1549431u\n", n
    }
    print ".loop GA"
    printf ".io VIN v(n%d)\n", out
    printf ".ac %s\n", ac
    print ".end"
}'
