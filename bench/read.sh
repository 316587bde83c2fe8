#!/bin/sh
# bench/read.sh: reading speed and memory: a generated netlist of about 100 MB read into a circuit ready for stamping
# Usage: sh bench/read.sh BUILD      (BUILD holds libtbeta.a)
# Environment:
#   READ_SECTIONS  sections of the RC line (bench/gen_family.sh line), default 2000000: 100 MB,
#                  4*10^6 element cards
#   READ_RUNS      rounds, default 5; the figures are medians over the rounds
#   READ_BEFORE    another folder holding an older libtbeta.a, timed in the same rounds
#                  (its tb_circuit_read and tb_mna_build must take the same arguments)
# Method (docs/performance.md, "Reading and memory"): bench/readnet calls tb_circuit_read
# (open, read, lex, parse, name indexes, the circuit's and the topology checks) three
# times in process and reports the median CPU time (user + system) of one read; each
# round runs the builds one after the other, so that both see the same load. Peak
# resident memory is bench/peakrss around `readnet FILE 1` (one read, no stamping),
# divided by the element cards and by the nonzeros of M (tb_mna_build's pattern).
set -eu
BUILD=${1:?usage: read.sh BUILD}
SECTIONS=${READ_SECTIONS:-2000000}
RUNS=${READ_RUNS:-5}
HERE=$(dirname "$0")
ROOT=$HERE/..
DIR=$BUILD/bench
WARN="-std=c11 -Wall -Wextra -Werror -Wshadow -Wmissing-prototypes -Wstrict-prototypes -Wwrite-strings -Wundef -Wold-style-definition"
LIBS="-lklu -lamd -lcolamd -lbtf -lsuitesparseconfig -ljansson -llapack -lblas -lm -lpthread"
mkdir -p "$DIR"
builds="now:$BUILD"
[ -n "${READ_BEFORE:-}" ] && builds="before:$READ_BEFORE $builds"
for b in $builds; do
    ${CC:-cc} $WARN -O2 -D_POSIX_C_SOURCE=200809L -I"$ROOT/include" -I"$ROOT/src" -I/usr/include/suitesparse \
        "$HERE/readnet.c" "${b#*:}/libtbeta.a" $LIBS -o "$DIR/readnet_${b%%:*}"
done
${CC:-cc} $WARN -O2 -D_POSIX_C_SOURCE=200809L "$HERE/peakrss.c" -o "$DIR/peakrss"

net=$DIR/read_line.net
sh "$HERE/gen_family.sh" line "$((SECTIONS + 2))" > "$net"
cards=$(awk 'NR > 1 && $0 !~ /^[.*]/ && NF > 0 { n++ } END { print n }' "$net")

# value KEY FILE: the number after KEY in a "key value" file
value() {
    awk -v k="$1" '$1 == k { print $2; found = 1 } END { if (!found) exit 1 }' "$2"
}
median() {
    printf '%s\n' "$@" | sort -g | awk '{ v[NR] = $1 } END { print NR % 2 ? v[(NR + 1) / 2] : (v[NR / 2] + v[NR / 2 + 1]) / 2 }'
}

"$DIR/readnet_now" "$net" 1 nnz > "$DIR/read_nnz.txt"
nnz=$(value nnz "$DIR/read_nnz.txt")
bytes=$(wc -c < "$net")
for b in $builds; do eval "cpu_${b%%:*}="; eval "rss_${b%%:*}="; done
round=0
while [ "$round" -lt "$RUNS" ]; do
    round=$((round + 1))
    for b in $builds; do
        k=${b%%:*}
        "$DIR/readnet_$k" "$net" 3 > "$DIR/read_$k.txt"
        "$DIR/peakrss" /dev/null "$DIR/readnet_$k" "$net" 1 > "$DIR/read_peak.txt"
        eval "cpu_$k=\"\$cpu_$k $(value cpu_s "$DIR/read_$k.txt")\""
        eval "rss_$k=\"\$rss_$k $(value maxrss_kib "$DIR/read_peak.txt")\""
    done
done
echo "netlist: $bytes bytes, $cards element cards, M: $(value unknowns "$DIR/read_nnz.txt") unknowns, $nnz nonzeros"
for b in $builds; do
    k=${b%%:*}
    eval "c=\$(median \$cpu_$k)"
    eval "r=\$(median \$rss_$k)"
    echo "$k $c $r" | awk -v bytes="$bytes" -v cards="$cards" -v nnz="$nnz" -v runs="$RUNS" '{
        printf "%-7s read %.2f s CPU (median of %d)  %.1f MB/s  peak %.0f MiB  %.0f bytes/card  %.0f bytes/nonzero\n",
               $1, $2, runs, bytes / $2 / 1e6, $3 / 1024, $3 * 1024 / cards, $3 * 1024 / nnz }'
done
