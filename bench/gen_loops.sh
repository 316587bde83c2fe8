#!/bin/sh
# bench/gen_loops.sh: writes a cascade of N inverting stages, each with its own .loop
# Usage: sh bench/gen_loops.sh N [UNKNOWNS]   (stdout)
# Stage k: RI (1k) from the previous output to the summing node mk, RF (2k) back from ok,
# EK (gain 10 000) drives xk, RP (1k) and CP (1 to 7 nF) make its one pole at ok. Each
# stage is a loop with its own unity crossing; 4 unknowns a stage. Invented for the bench.
set -eu
N=${1:?usage: gen_loops.sh N}
awk -v N="$N" 'BEGIN {
    printf "cascade of %d stages, a loop in each\n", N
    print "V1 in 0 AC 1"
    prev = "in"
    for (k = 1; k <= N; k++) {
        printf "RI%d %s m%d 1k\n", k, prev, k
        printf "RF%d m%d o%d 2k\n", k, k, k
        printf "E%d x%d 0 0 m%d 10000\n", k, k, k
        printf "RP%d x%d o%d 1k\n", k, k, k
        printf "CP%d o%d 0 %dn\n", k, k, 1 + k % 7
        printf ".loop E%d\n", k
        prev = "o" k
    }
    print ".ac dec 20 1 1g"
    print ".end"
}'
