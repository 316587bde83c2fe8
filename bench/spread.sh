#!/bin/sh
# bench/spread.sh: Monte Carlo throughput (tbeta spread) against bare refactor + solve (docs/spread.md)
# Usage: sh bench/spread.sh BUILD [UNKNOWNS [SAMPLES [JOBS]]]   (defaults 1000, 200, 1)
# The line family of bench/gen_family.sh at UNKNOWNS unknowns on 50 frequencies (lin 50 1k 1g),
# every resistor and capacitor of the line spread flat 1 %; bench/spread_mc times the Monte
# Carlo and the floor (SAMPLES passes of tb_mna_values + refactor + one solve over the grid).
set -eu
BUILD=${1:?usage: spread.sh BUILD [UNKNOWNS [SAMPLES [JOBS]]]}
N=${2:-1000}
SAMPLES=${3:-200}
JOBS=${4:-1}
HERE=$(dirname "$0")
DIR=$BUILD/bench
mkdir -p "$DIR"
WARN="-std=c11 -Wall -Wextra -Werror -Wshadow -Wmissing-prototypes -Wstrict-prototypes -Wwrite-strings -Wundef -Wold-style-definition"
${CC:-cc} $WARN -O2 -D_POSIX_C_SOURCE=200809L -I"$HERE/../include" -I"$HERE/../src" -I/usr/include/suitesparse \
    "$HERE/spread_mc.c" "$BUILD/libtbeta.a" -lklu -lamd -lcolamd -lbtf -lsuitesparseconfig -ljansson -llapack -lblas \
    -lm -lpthread -o "$DIR/spread_mc"
net=$DIR/spread_line_$N.net
sh "$HERE/gen_family.sh" line "$N" "lin 50 1k 1g" | sed 's/^\.end$/.spread R* C* flat 1%\n.end/' > "$net"
echo "tbeta bench: Monte Carlo of $net, $SAMPLES samples, $JOBS thread(s)"
"$DIR/spread_mc" "$net" "$SAMPLES" "$JOBS"
