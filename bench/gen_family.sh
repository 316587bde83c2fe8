#!/bin/sh
# bench/gen_family.sh: writes one netlist of a benchmark family (weak-loop RC line, buffered strong-loop line, 2-D RC mesh)
# Usage: sh bench/gen_family.sh FAMILY UNKNOWNS [AC_SPEC] > FILE
#   FAMILY    line | buffered | mesh
#   UNKNOWNS  about this many MNA unknowns (nodes other than ground plus branch currents)
#   AC_SPEC   the .ac grid, default "dec 10 1 1g": 10 points a decade from 1 Hz to 1 GHz, 91 points
#
# The circuits (invented for the benchmark):
#   line      VIN -- RS 1k -- n1 -- 10 ohm -- n2 -- ... -- nN, 1 pF from every node to ground,
#             RT 1k at the far end. GW (1 uS) draws gm V(nN) out of n1: a weak loop, T(0) about
#             1e-6 at 10^5 unknowns (gm times about 1k times the line's DC divider RT/(R_line + RT)).
#             The response decays as exp(-N sqrt(w R C/2)) along the line: above some MHz most of
#             the solution underflows (e^-8000 at the far end of 10^5 sections at 1 GHz).
#             Unknowns: N + 1 nodes and VIN's branch.
#   buffered  EA (gain 2000, .loop) compares in with the far end fb; RD 1k and CD 159.15 uF give one
#             dominant pole at 1 Hz; then S segments, each a unity-gain buffer E driving 50 nodes
#             joined by 10 ohm resistors with 0.1 pF to ground, unloaded. Every segment has DC gain
#             1, so T(0) = 2000 and A(0) = 2000/2001; T ~ 2000/(1 + j f/1 Hz) up to the segments'
#             own poles (about 100 MHz each). Unknowns: 51 per segment, plus 5.
#   mesh      a W x W grid of nodes m_r_c, 1k between horizontal and vertical neighbours, 1 pF from
#             every node to ground; VIN drives corner (1,1) through RS 1k, RL 1k loads the far
#             corner (W,W), and GM (0.1 S, .loop) draws gm V(W,W) out of corner (1,1): a loop from
#             corner to corner. Unknowns: W^2 + 2.
# Every family has .io VIN v(far end), so the sweep computes A, A_inf and A0 as well as T.
set -eu
family=${1:?usage: gen_family.sh FAMILY UNKNOWNS [AC_SPEC]}
unknowns=${2:?usage: gen_family.sh FAMILY UNKNOWNS [AC_SPEC]}
ac=${3:-dec 10 1 1g}
case $family in
line)
    awk -v u="$unknowns" -v ac="$ac" 'BEGIN {
        N = u - 2; if (N < 2) N = 2
        printf "RC line benchmark: %d sections, a weak transconductance loop\n", N
        print "VIN in 0 AC 1"
        print "RS in n1 1k"
        for (i = 1; i <= N; i++) {
            printf "C%d n%d 0 1p\n", i, i
            if (i < N) printf "R%d n%d n%d 10\n", i, i, i + 1
        }
        printf "RT n%d 0 1k\n", N
        printf "GW n1 0 n%d 0 1u\n", N
        print ".loop GW"
        printf ".io VIN v(n%d)\n", N
        printf ".ac %s\n.end\n", ac
    }' ;;
buffered)
    awk -v u="$unknowns" -v ac="$ac" 'BEGIN {
        K = 50
        S = int((u - 5) / (K + 1) + 0.5); if (S < 1) S = 1
        printf "buffered RC line benchmark: %d segments of %d nodes, T(0) = 2000\n", S, K
        print "VIN in 0 AC 1"
        print "EA a 0 in fb 2000"
        print "RD a d 1k"
        print "CD d 0 159.1549431u"
        prev = "d"
        for (s = 1; s <= S; s++) {
            printf "EB%d m%d_1 0 %s 0 1\n", s, s, prev
            for (i = 1; i <= K; i++) {
                node = (s == S && i == K) ? "fb" : sprintf("m%d_%d", s, i)
                printf "C%d_%d %s 0 0.1p\n", s, i, node
                if (i > 1) printf "R%d_%d %s %s 10\n", s, i, last, node
                last = node
            }
            prev = last
        }
        print ".loop EA"
        print ".io VIN v(fb)"
        printf ".ac %s\n.end\n", ac
    }' ;;
mesh)
    awk -v u="$unknowns" -v ac="$ac" 'BEGIN {
        W = int(sqrt(u - 2) + 0.5); if (W < 2) W = 2
        printf "RC mesh benchmark: %d x %d nodes, a loop from corner to corner\n", W, W
        print "VIN in 0 AC 1"
        print "RS in m1_1 1k"
        for (r = 1; r <= W; r++)
            for (c = 1; c <= W; c++) {
                printf "C%d_%d m%d_%d 0 1p\n", r, c, r, c
                if (c < W) printf "RH%d_%d m%d_%d m%d_%d 1k\n", r, c, r, c, r, c + 1
                if (r < W) printf "RV%d_%d m%d_%d m%d_%d 1k\n", r, c, r, c, r + 1, c
            }
        printf "RL m%d_%d 0 1k\n", W, W
        printf "GM m1_1 0 m%d_%d 0 0.1\n", W, W
        print ".loop GM"
        printf ".io VIN v(m%d_%d)\n", W, W
        printf ".ac %s\n.end\n", ac
    }' ;;
*)
    echo "gen_family.sh: unknown family '$family' (line, buffered, mesh)" >&2
    exit 2 ;;
esac
