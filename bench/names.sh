#!/bin/sh
# bench/names.sh: times reading netlists with many names (.param cards, subcircuit definitions, pins)
# Usage: sh bench/names.sh BUILD   (BUILD holds tbeta); NAMES_SIZES (default "50000 100000 200000 400000")
# Prints one line per netlist: kind, count, best wall time of three runs and peak memory.
# Timing lives here and in docs/performance.md, never in a test.
set -eu
BUILD=${1:?usage: names.sh BUILD}
SIZES=${NAMES_SIZES:-50000 100000 200000 400000}
HERE=$(dirname "$0")
DIR=$BUILD/bench
mkdir -p "$DIR"
for kind in params subckts; do
    for n in $SIZES; do
        net=$DIR/names_${kind}_$n.net
        sh "$HERE/gen_names.sh" "$kind" "$n" >"$net"
        best=
        for run in 1 2 3; do
            /usr/bin/time -f "%e %M" "$BUILD/tbeta" "$net" --no-stability >/dev/null 2>"$DIR/names.time" || true
            line=$(tail -n 1 "$DIR/names.time")
            best=$(printf '%s\n%s\n' "$best" "$line" | awk 'NF == 2 && (b == "" || $1 < b) { b = $1; m = $2 } END { print b, m }')
        done
        echo "$kind $n $best" | awk '{ printf "%-8s %8d  %6.2f s  %5.0f MiB\n", $1, $2, $3, $4 / 1024 }'
    done
done
