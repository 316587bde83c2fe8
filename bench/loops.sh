#!/bin/sh
# bench/loops.sh: times netlists with many loops (a cascade whose every stage is a .loop)
# Usage: sh bench/loops.sh BUILD   (BUILD holds tbeta); LOOPS_SIZES (default "50 100 200 400")
# Prints one line per cascade: loops, unknowns, best wall time of three runs with poles
# (the default --pole-limit 500) and without (--pole-limit 0), peak memory.
# Timing lives here and in docs/performance.md, never in a test (tests/test_loops.c counts solves).
set -eu
BUILD=${1:?usage: loops.sh BUILD}
SIZES=${LOOPS_SIZES:-50 100 200 400}
HERE=$(dirname "$0")
DIR=$BUILD/bench
mkdir -p "$DIR"
# best NETLIST ARGS...: "seconds KiB", the best of three runs
best() {
    net=$1
    shift
    b=
    for run in 1 2 3; do
        /usr/bin/time -f "%e %M" "$BUILD/tbeta" "$net" "$@" >/dev/null 2>"$DIR/loops.time" || true
        line=$(tail -n 1 "$DIR/loops.time")
        b=$(printf '%s\n%s\n' "$b" "$line" | awk 'NF == 2 && (b == "" || $1 < b) { b = $1; m = $2 } END { print b, m }')
    done
    echo "$b"
}
printf '%6s %9s %12s %16s %9s\n' loops unknowns "poles on" "--pole-limit 0" memory
for n in $SIZES; do
    net=$DIR/loops_$n.net
    sh "$HERE/gen_loops.sh" "$n" >"$net"
    on=$(best "$net")
    off=$(best "$net" --pole-limit 0)
    echo "$n $((4 * n + 2)) $on $off" |
        awk '{ printf "%6d %9d %10.2f s %14.2f s %6.0f MiB\n", $1, $2, $3, $5, $4 / 1024 }'
done
