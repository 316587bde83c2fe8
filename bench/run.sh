#!/bin/sh
# bench/run.sh: `make bench`: times tbeta's sweep on large generated ladders against the KLU floor, and its peak memory
# Usage: sh bench/run.sh BUILD        (BUILD holds tbeta and libtbeta.a)
# Environment: BENCH_SIZES (default "100000 200000"), BENCH_RUNS (best of, default 3),
#              BENCH_REPEATS (passes of each in-process loop in floor, default 2),
#              BENCH_LIBRARY (netlists in the library benchmark, default 1000; 0 skips it).
#
# Method (docs/performance.md):
#   end to end  `tbeta sweep FILE --csv` on a 200-point grid, wall clock, parse and
#               output included, best of BENCH_RUNS; e2e/pt = that time / 200
#   fixed cost  the same netlist with a 2-point grid: fixed = t2 - 2 p and
#               p = (t200 - t2) / 198 is tbeta's marginal cost per point
#   floor       bench/floor: per point tb_mna_values + tb_solver_refactor + one
#               1-RHS tb_solver_solve on the same matrix and frequencies
#   peak memory ru_maxrss of the 200-point run (bench/peakrss), in bytes per node
#   library     `tbeta check DIR --jobs 1` and `--jobs 2 --pole-limit 0` on BENCH_LIBRARY
#               generated netlists of 10 to 2000 nodes (bench/gen_library.sh), best of
#               BENCH_RUNS: netlists per second and the speed-up of two threads
set -eu
BUILD=${1:?usage: run.sh BUILD}
SIZES=${BENCH_SIZES:-100000 200000}
RUNS=${BENCH_RUNS:-3}
REPEATS=${BENCH_REPEATS:-2}
DIR=$BUILD/bench
HERE=$(dirname "$0")
ROOT=$HERE/..
WARN="-std=c11 -Wall -Wextra -Werror -Wshadow -Wmissing-prototypes -Wstrict-prototypes -Wwrite-strings -Wundef -Wold-style-definition"
mkdir -p "$DIR"

for prog in floor peakrss counts; do
    ${CC:-cc} $WARN -O2 -D_POSIX_C_SOURCE=200809L -I"$ROOT/include" -I"$ROOT/src" -I/usr/include/suitesparse \
        "$HERE/$prog.c" "$BUILD/libtbeta.a" \
        -lklu -lamd -lcolamd -lbtf -lsuitesparseconfig -ljansson -llapack -lblas -lm -o "$DIR/$prog"
done

# value KEY FILE: the number after KEY in a "key value" file
value() {
    awk -v k="$1" '$1 == k { print $2; found = 1 } END { if (!found) exit 1 }' "$2"
}

# best RUNS NETLIST OUT: best wall time of RUNS sweeps into OUT; prints "wall maxrss_kib"
# (the largest peak of the runs), nothing when a run fails
best() {
    i=0
    wall=""
    rss=0
    while [ "$i" -lt "$1" ]; do
        "$DIR/peakrss" "$3" "$BUILD/tbeta" sweep "$2" --csv > "$DIR/run.txt" || return 1
        w=$(value wall_s "$DIR/run.txt")
        r=$(value maxrss_kib "$DIR/run.txt")
        wall=$(awk -v a="$wall" -v b="$w" 'BEGIN { print (a == "" || b + 0 < a + 0) ? b : a }')
        rss=$(awk -v a="$rss" -v b="$r" 'BEGIN { print (b + 0 > a + 0) ? b : a }')
        i=$((i + 1))
    done
    echo "$wall $rss"
}

# check CSV: the 1 Hz row against the single-pole algebra of gen_ladder.sh
# (T = 1000/(1 + j), A_inf = 1, A0 = 0); the sections' own poles shift |T| and
# its phase there by far less than the tolerances.
check() {
    awk -F, 'NR == 1 { for (i = 1; i <= NF; i++) col[$i] = i; next }
        NR == 2 {
            tr = $col["T_re"]; ti = $col["T_im"]
            mag = sqrt(tr * tr + ti * ti); want = 1000 / sqrt(2)
            bad = $col["freq_hz"] != 1 || (mag - want) / want > 1e-3 || (want - mag) / want > 1e-3 ||
                  $col["T_phase_deg"] > -44.9 || $col["T_phase_deg"] < -45.1 ||
                  $col["Ainf_re"] - 1 > 1e-9 || 1 - $col["Ainf_re"] > 1e-9 ||
                  $col["A0_re"] > 1e-9 || -$col["A0_re"] > 1e-9
            if (bad) { print "bench: unexpected 1 Hz row: " $0 > "/dev/stderr"; exit 1 }
        }
        END { if (NR != 201) { print "bench: expected 200 rows, got " NR - 1 > "/dev/stderr"; exit 1 } }' "$1"
}

# counts: the numeric factorizations of M on the grid with and without the per-point
# analyses (.zport x2, .break, --all-sources): the same, one per point (docs/performance.md)
counts() {
    plain=$DIR/counts_plain.net
    grep -v -i -e '^\.zport' -e '^\.break' "$1" > "$plain"
    a=$("$DIR/counts" "$plain")
    b=$("$DIR/counts" "$1" --all-sources)
    printf '  %-34s %12s %12s\n' "$(basename "$1")" "plain" "all on"
    for k in grid_points grid_factorizations grid_pivoted grid_solve_columns probe_factorizations step_factorizations; do
        printf '  %-34s %12s %12s\n' "$k" "$(echo "$a" | awk -v k=$k '$1 == k { print $2 }')" \
            "$(echo "$b" | awk -v k=$k '$1 == k { print $2 }')"
    done
}
echo "tbeta bench: factorizations of M, plain and with .zport x2, .break and --all-sources"
counts "$ROOT/tests/fb/noninverting_x20.net"
counts "$ROOT/tests/fb/noninverting_gain1e7_ports.net"
[ "${BENCH_COUNTS_ONLY:-0}" = 1 ] && exit 0

echo "tbeta bench: $(nproc) cores, $(awk -F': ' '/^model name/ { print $2; exit }' /proc/cpuinfo)"
echo "  grid: .ac dec 50 1 9.99k (200 points); times are seconds; best of $RUNS runs"
RESULTS=$DIR/results.txt
: > "$RESULTS"
for n in $SIZES; do
    net=$DIR/ladder_$n.net
    net2=$DIR/ladder_${n}_2pt.net
    sh "$HERE/gen_ladder.sh" "$n" > "$net"
    sh "$HERE/gen_ladder.sh" "$n" "lin 2 1 9.99k" > "$net2"
    set -- $(best "$RUNS" "$net" "$DIR/ladder_$n.csv") none
    t200=$1
    rss=${2:-}
    set -- $(best "$RUNS" "$net2" /dev/null) none
    t2=$1
    if [ "$t200" = none ] || [ "$t2" = none ]; then
        echo "bench: tbeta sweep failed on $net" >&2
        exit 1
    fi
    check "$DIR/ladder_$n.csv"
    "$DIR/floor" "$net" "$REPEATS" > "$DIR/floor_$n.txt"
    echo "$(value nodes "$DIR/floor_$n.txt") $t200 $t2 $rss" >> "$RESULTS"
    echo
    echo "== $(value nodes "$DIR/floor_$n.txt") nodes, $(value unknowns "$DIR/floor_$n.txt") unknowns, nnz(M) $(value nnz "$DIR/floor_$n.txt"), nnz(L+U) $(value lu_nnz "$DIR/floor_$n.txt")"
    awk -v t200="$t200" -v t2="$t2" -v rss="$rss" '
        { v[$1] = $2 }
        END {
            n = v["nodes"]; fl = v["floor_s"]; p = (t200 - t2) / 198; fixed = t2 - 2 * p
            printf "  end to end   %8.3f s  = %7.2f ms/point  ratio to floor %.2f (target <= 1.5)\n", t200, 1e3 * t200 / 200, t200 / 200 / fl
            printf "  marginal     %8.3f s fixed (2-point run %.3f s) + %7.2f ms/point  ratio %.2f\n", fixed, t2, 1e3 * p, p / fl
            printf "  in process   tbeta point loop %7.2f ms/point  ratio %.2f\n", 1e3 * v["loop_s"], v["loop_s"] / fl
            printf "  floor        %7.2f ms/point (refactor incl. pivot check + 1 solve); KLU bare %.2f\n", 1e3 * fl, 1e3 * v["klu_s"]
            printf "  parts, ms    values %.2f  refactor %.2f  rcond %.2f  solve 1 RHS %.2f  2 RHS %.2f\n", 1e3 * v["values_s"], 1e3 * (v["refactor_s"] - v["values_s"]), 1e3 * v["rcond_s"], 1e3 * v["solve1_s"], 1e3 * v["solve2_s"]
            printf "  setup, s     read %.3f  stamp %.3f  analyze %.3f  factor %.3f\n", v["read_s"], v["stamp_s"], v["analyze_s"], v["factor_s"]
            printf "  peak memory  %.1f MiB = %.0f bytes/node\n", rss / 1024, rss * 1024 / n
        }' "$DIR/floor_$n.txt"
done
awk 'NR == 1 { n1 = $1; r1 = $4 } NR > 1 { n2 = $1; r2 = $4 }
    END { if (NR > 1) printf "\nmemory growth %.0f bytes per added node (%.0f and %.0f bytes/node at the two sizes)\n",
          (r2 - r1) * 1024 / (n2 - n1), r1 * 1024 / n1, r2 * 1024 / n2 }' "$RESULTS"

# ---- library benchmark: tbeta check over many netlists, one and two threads ----
LIBN=${BENCH_LIBRARY:-1000}
if [ "$LIBN" -gt 0 ]; then
    LIB=$DIR/lib
    rm -rf "$LIB"
    sh "$HERE/gen_library.sh" "$LIB" "$LIBN"
    # best_check JOBS: best wall time of RUNS checks with JOBS threads (every netlist must pass)
    best_check() {
        i=0
        wall=""
        while [ "$i" -lt "$RUNS" ]; do
            "$DIR/peakrss" "$DIR/check_$1.txt" "$BUILD/tbeta" check "$LIB" --jobs "$1" --pole-limit 0 \
                > "$DIR/peak_check.txt" || { echo "bench: tbeta check failed" >&2; return 1; }
            w=$(value wall_s "$DIR/peak_check.txt")
            wall=$(awk -v a="$wall" -v b="$w" 'BEGIN { print (a == "" || b + 0 < a + 0) ? b : a }')
            i=$((i + 1))
        done
        echo "$wall"
    }
    t1=$(best_check 1)
    t2=$(best_check 2)
    cmp -s "$DIR/check_1.txt" "$DIR/check_2.txt" || { echo "bench: --jobs 1 and 2 differ" >&2; exit 1; }
    grep -q "^check: $LIBN netlists: $LIBN passed" "$DIR/check_1.txt" ||
        { echo "bench: not every library netlist passed" >&2; exit 1; }
    nodes=$(cat "$LIB"/*/*.net | grep -c '^C[0-9]')
    echo
    echo "== library: $LIBN netlists, 10 to 2000 nodes ($nodes nodes in all), .ac dec 10 1 1meg, 5 expectations each"
    awk -v n="$LIBN" -v t1="$t1" -v t2="$t2" 'BEGIN {
        printf "  --jobs 1   %7.3f s  %7.1f netlists/s\n", t1, n / t1
        printf "  --jobs 2   %7.3f s  %7.1f netlists/s  speed-up %.2f (target: 1000 in < 10 s)\n", t2, n / t2, t1 / t2
    }'
fi