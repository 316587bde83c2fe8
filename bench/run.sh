#!/bin/sh
# bench/run.sh: `make bench`: tbeta's sweep and report on three generated families against an independent KLU floor
# Usage: sh bench/run.sh BUILD        (BUILD holds tbeta and libtbeta.a)
# Environment:
#   BENCH_RUNS      repetitions of each timing, the figures are medians (default 3)
#   BENCH_FAMILIES  families of bench/gen_family.sh (default "line buffered mesh")
#   BENCH_SIZES     unknowns (default "10000 100000")
#   BENCH_MILLION   1: also the line at 10^6 unknowns (sweep and floor only; about 3 minutes)
#   BENCH_REPORTS   FAMILY:UNKNOWNS cases whose full report is timed (default
#                   "line:10000 buffered:10000 mesh:10000 line:100000 buffered:100000"; the mesh
#                   at 10^5 would take about 2 hours: about 1800 factorizations of 4 s)
#   BENCH_REPORT_RUNS  repetitions of each report (default 1)
#   BENCH_LIBRARY   netlists in the library benchmark (default 1000; 0 skips it)
#   BENCH_READ      1 (default): also reading a 100 MB netlist (bench/read.sh, its READ_* settings); 0 skips it
#   BENCH_COUNTS_ONLY  1: the factorization counts only
#   BENCH_OUT       the results file (default BUILD/bench/families.txt), read by bench/plot.py
#   BENCH_BEFORE    another build folder (an older tbeta) timed in the same run: its sweep in
#                   the first round and its report once, against the same floor
#
# Method (docs/performance.md), for each family and size, BENCH_RUNS rounds, each round:
#   floor     bench/klu_floor: its own reader, MNA and CSC assembly, bare KLU: per point the
#             values of M(jw), klu_z_refactor and one klu_z_solve of the input's response; the
#             time of one pass over the grid (seconds per point x points)
#   sweep 1   `tbeta sweep FILE --csv --jobs 1`, wall clock and CPU time from fork to exit
#   sweep N   `tbeta sweep FILE --csv` (one thread per core), wall clock
#   then      `tbeta FILE` (the full report, one thread per core) BENCH_REPORT_RUNS times
# and reports the medians over the rounds of sweep 1 / floor, sweep N / floor, sweep 1 /
# sweep N (the speed-up of the threads), and report / sweep N; and, less disturbed by other
# work on the machine, sweep 1 / floor in CPU time (both programs' own). The floor's response at the
# first frequency must equal the first row of tbeta's table (1e-9: the same matrix), and the
# tables of 1 and N threads must be the same byte for byte.
set -eu
BUILD=${1:?usage: run.sh BUILD}
RUNS=${BENCH_RUNS:-3}
FAMILIES=${BENCH_FAMILIES:-line buffered mesh}
SIZES=${BENCH_SIZES:-10000 100000}
REPORTS=${BENCH_REPORTS:-line:10000 buffered:10000 mesh:10000 line:100000 buffered:100000}
REPORT_RUNS=${BENCH_REPORT_RUNS:-1}
DIR=$BUILD/bench
OUT=${BENCH_OUT:-$DIR/families.txt}
HERE=$(dirname "$0")
ROOT=$HERE/..
WARN="-std=c11 -Wall -Wextra -Werror -Wshadow -Wmissing-prototypes -Wstrict-prototypes -Wwrite-strings -Wundef -Wold-style-definition"
LIBS="-lklu -lamd -lcolamd -lbtf -lsuitesparseconfig"
mkdir -p "$DIR"

for prog in parts peakrss counts; do
    ${CC:-cc} $WARN -O2 -D_POSIX_C_SOURCE=200809L -I"$ROOT/include" -I"$ROOT/src" -I/usr/include/suitesparse \
        "$HERE/$prog.c" "$BUILD/libtbeta.a" $LIBS -ljansson -llapack -lblas -lm -lpthread -o "$DIR/$prog"
done
# the floor shares no code with tbeta
${CC:-cc} $WARN -O2 -D_POSIX_C_SOURCE=200809L -I/usr/include/suitesparse "$HERE/klu_floor.c" $LIBS -lm \
    -o "$DIR/klu_floor"

# value KEY FILE: the number after KEY in a "key value" file
value() {
    awk -v k="$1" '$1 == k { print $2; found = 1 } END { if (!found) exit 1 }' "$2"
}

# median NUMBERS...: the median (the mean of the middle two for an even count)
median() {
    printf '%s\n' "$@" | sort -g | awk '{ v[NR] = $1 } END { print NR % 2 ? v[(NR + 1) / 2] : (v[NR / 2] + v[NR / 2 + 1]) / 2 }'
}

# timed OUTFILE COMMAND...: runs COMMAND under bench/peakrss; prints "wall cpu maxrss_kib"
timed() {
    out=$1
    shift
    "$DIR/peakrss" "$out" "$@" > "$DIR/peak.txt" || { echo "bench: $* failed" >&2; return 1; }
    echo "$(value wall_s "$DIR/peak.txt") $(value cpu_s "$DIR/peak.txt") $(value maxrss_kib "$DIR/peak.txt")"
}

# counts: the numeric factorizations of M on the grid with and without the per-point
# analyses (.zport x2, .break, --all-sources): the same, one per point (docs/performance.md)
counts() {
    plain=$DIR/counts_plain.net
    grep -v -i -e '^\.zport' -e '^\.break' "$1" > "$plain"
    a=$("$DIR/counts" "$plain")
    b=$("$DIR/counts" "$1" --all-sources)
    printf '  %-34s %12s %12s\n' "$(basename "$1")" "plain" "all on"
    for k in grid_points grid_factorizations grid_pivoted grid_solve_columns probe_factorizations step_factorizations \
             probe_solve_columns; do
        printf '  %-34s %12s %12s\n' "$k" "$(echo "$a" | awk -v k=$k '$1 == k { print $2 }')" \
            "$(echo "$b" | awk -v k=$k '$1 == k { print $2 }')"
    done
}
echo "tbeta bench: factorizations of M, plain and with .zport x2, .break and --all-sources"
counts "$ROOT/tests/fb/noninverting_x20.net"
counts "$ROOT/tests/fb/noninverting_gain1e7_ports.net"
[ "${BENCH_COUNTS_ONLY:-0}" = 1 ] && exit 0

# --jobs exists (an older tbeta, measured for comparison, runs one thread)
if "$BUILD/tbeta" sweep --help | grep -q -- --jobs; then JOBS1="--jobs 1"; else JOBS1=""; fi
BEFORE=${BENCH_BEFORE:-}

# same_first_row CSV FLOOR_OUT: the floor's response equals the table's first A (1e-9)
same_first_row() {
    awk -F, -v re="$(value a_re "$2")" -v im="$(value a_im "$2")" '
        NR == 1 { for (i = 1; i <= NF; i++) col[$i] = i; next }
        NR == 2 { dr = $col["A_re"] - re; di = $col["A_im"] - im
                  if (dr * dr + di * di > 1e-18 * (re * re + im * im)) {
                      print "bench: the floor solved another matrix: A " $col["A_re"] " " $col["A_im"] " against " re " " im > "/dev/stderr"; exit 1 } }' "$1"
}

# one_case FAMILY UNKNOWNS: the rounds, then one line of $OUT
one_case() {
    fam=$1 n=$2
    case $fam in mesh) ac="dec 2 1 1g" ;; *) ac="dec 10 1 1g" ;; esac
    net=$DIR/${fam}_$n.net
    sh "$HERE/gen_family.sh" "$fam" "$n" "$ac" > "$net"
    want_report=0
    for c in $REPORTS; do [ "$c" = "$fam:$n" ] && want_report=1; done
    r1="" rN="" rsp="" cpu1="" s1="" sN="" fl="" rss="" sB="" rB=""
    i=0
    while [ "$i" -lt "$RUNS" ]; do
        if [ "$i" -eq 0 ]; then mode=ftz; else mode=; fi
        "$DIR/klu_floor" "$net" 1 $mode > "$DIR/floor.txt"
        [ "$i" -eq 0 ] && cp "$DIR/floor.txt" "$DIR/floor_first.txt"
        points=$(value points "$DIR/floor.txt")
        f=$(awk -v p="$(value floor_s "$DIR/floor.txt")" -v n="$points" 'BEGIN { print p * n }')
        fc=$(awk -v p="$(value floor_cpu_s "$DIR/floor.txt")" -v n="$points" 'BEGIN { print p * n }')
        set -- $(timed "$DIR/sweep1.csv" "$BUILD/tbeta" sweep "$net" --csv $JOBS1)
        t1=$1 c1=$2 rss=$3
        set -- $(timed "$DIR/sweepN.csv" "$BUILD/tbeta" sweep "$net" --csv)
        tN=$1
        same_first_row "$DIR/sweep1.csv" "$DIR/floor.txt"
        cmp -s "$DIR/sweep1.csv" "$DIR/sweepN.csv" || { echo "bench: --jobs 1 and N tables differ" >&2; exit 1; }
        fl="$fl $f" s1="$s1 $t1" sN="$sN $tN"
        if [ -n "$BEFORE" ] && [ "$i" -eq 0 ]; then
            set -- $(timed "$DIR/sweepB.csv" "$BEFORE/tbeta" sweep "$net" --csv)
            sB=$1
            rB=$(awk -v a="$1" -v b="$f" 'BEGIN { print a / b }')
        fi
        r1="$r1 $(awk -v a="$t1" -v b="$f" 'BEGIN { print a / b }')"
        rN="$rN $(awk -v a="$tN" -v b="$f" 'BEGIN { print a / b }')"
        rsp="$rsp $(awk -v a="$t1" -v b="$tN" 'BEGIN { print a / b }')"
        cpu1="$cpu1 $(awk -v a="$c1" -v b="$fc" 'BEGIN { print a / b }')"
        i=$((i + 1))
    done
    rr="-" tr="-"
    if [ "$want_report" = 1 ]; then
        k=0 reps=""
        while [ "$k" -lt "$REPORT_RUNS" ]; do
            set -- $(timed "$DIR/report.txt" "$BUILD/tbeta" "$net")
            reps="$reps $1"
            k=$((k + 1))
        done
        tr=$(median $reps)
        rr=$(awk -v a="$tr" -v b="$(median $sN)" 'BEGIN { print a / b }')
    fi
    bs="-" brr="-"
    if [ -n "$BEFORE" ]; then
        bs=$rB
        if [ "$want_report" = 1 ]; then
            set -- $(timed "$DIR/reportB.txt" "$BEFORE/tbeta" "$net")
            brr=$(awk -v a="$1" -v b="$sB" 'BEGIN { print a / b }')
        fi
    fi
    ff=$DIR/floor_first.txt
    echo "$fam $(value unknowns "$ff") $points $(value lu_nnz "$ff") $(median $fl) $(value floor_ftz_s "$ff") \
$(value factor_s "$ff") $(value refactor_s "$ff") $(median $s1) $(median $sN) $tr $(median $r1) $(median $rN) \
$(median $rsp) $(median $cpu1) $rr $rss $bs $brr" >> "$OUT"
    tail -n 1 "$OUT" | awk '{
        printf "  %-9s %8d unknowns %3d points  nnz(L+U) %9d   floor %8.3f s (%.2f ms/point; FTZ %.2f; pivoted factor %.1f refactors)\n", $1, $2, $3, $4, $5, 1e3 * $5 / $3, 1e3 * $6, $7 / $8
        printf "            sweep --jobs 1 %8.3f s  = %5.2f x floor (CPU %5.2f)   sweep --jobs N %8.3f s = %5.2f x floor (speed-up %.2f)\n", $9, $12, $15, $10, $13, $14
        if ($11 != "-") printf "            report %8.3f s = %5.2f x sweep --jobs N;  peak memory %.1f MiB\n", $11, $16, $17 / 1024
        else printf "            report not timed;  peak memory %.1f MiB\n", $17 / 1024
        if ($18 != "-") printf "            before: sweep %5.2f x floor, report %s x its sweep\n", $18, $19 }'
}

echo "tbeta bench: $(nproc) cores, $(awk -F': ' '/^model name/ { print $2; exit }' /proc/cpuinfo); medians of $RUNS rounds"
echo "# family unknowns points lu_nnz floor_s floor_ftz_pp factor_s refactor_s sweep1_s sweepN_s report_s sweep1/floor sweepN/floor speedup cpu_sweep1/floor report/sweepN maxrss_kib before_sweep/floor before_report/sweep" > "$OUT"
for n in $SIZES; do
    for fam in $FAMILIES; do
        one_case "$fam" "$n"
    done
done
[ "${BENCH_MILLION:-0}" = 1 ] && one_case line 1000000
echo "results in $OUT (bench/plot.py draws docs/performance.svg from it)"

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

# ---- reading: a 100 MB netlist into a circuit (bench/read.sh) ----
if [ "${BENCH_READ:-1}" = 1 ]; then
    echo
    echo "== reading (bench/read.sh)"
    sh "$HERE/read.sh" "$BUILD"
fi
