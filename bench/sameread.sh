#!/bin/sh
# bench/sameread.sh: two tbeta builds read every netlist alike: `tbeta sweep` output, messages and exit status byte for byte
# Usage: sh bench/sameread.sh OLD_TBETA NEW_TBETA [WORKDIR]
#   OLD_TBETA, NEW_TBETA  the two programs (say main's, built in /tmp, and this tree's build/tbeta)
#   WORKDIR               where the outputs go (default: a fresh folder under /tmp)
# Runs `tbeta sweep` on every .net under netlists/, tests/ and docs/examples/ (the reader's
# fixtures among them: their messages are compared too), and on generated netlists that
# reach the reader's slower paths: the three benchmark families at about 10^4 unknowns,
# and a line with duplicate names, misnamed sensing sources, floating groups, loops of
# voltage sources and of inductors, and dangling nodes. Prints one line per difference
# and a closing count; exits 1 when anything differs. For changes to reading (parse.c,
# lex.c, names.c, circuit.c, topology.c) that must leave every result unchanged.
set -u
OLD=${1:?usage: sameread.sh OLD_TBETA NEW_TBETA [WORKDIR]}
NEW=${2:?usage: sameread.sh OLD_TBETA NEW_TBETA [WORKDIR]}
HERE=$(dirname "$0")
ROOT=$HERE/..
WORK=${3:-$(mktemp -d /tmp/sameread.XXXXXX)}
mkdir -p "$WORK/gen"

gen=$WORK/gen
sh "$HERE/gen_family.sh" line 10000 "dec 2 1 1meg" > "$gen/line.net"
sh "$HERE/gen_family.sh" buffered 10000 "dec 2 1 1meg" > "$gen/buffered.net"
sh "$HERE/gen_family.sh" mesh 2500 "dec 2 1 1meg" > "$gen/mesh.net"
# the line with cards appended before its last three (.loop, .io, .ac, .end follow them)
with_cards() {
    head -n -4 "$gen/line.net"
    cat
    tail -n 4 "$gen/line.net"
}
with_cards > "$gen/faults.net" <<'EOF'
CZ1 i1 0 1p
RZ1 i1 i2 1k
RZ2 i2 i3 1k
IZ1 j1 0 1m
RZ3 j1 j2 1k
CZ2 k1 0 1p
CZ3 k1 0 1p
EZ1 q1 0 n5 0 2
RZ4 q1 q2 1k
RZ5 q3 0 1k
VZ1 v1 0 1
VZ2 v1 0 2
LZ1 l1 0 1u
LZ2 l1 0 2u
EOF
with_cards > "$gen/names.net" <<'EOF'
RZ4 q1 0 1k
RZ5 q3 0 1k
FX1 q1 0 VIM 3
FX2 q1 0 R1 3
HX3 q3 0 VIN 2
KX q3 0 1
VIN2 q4 0 1
VIn2 q4 0 1
FX4 q1 0 VIN3 1
R7 n7 0 1k
EOF

count=0
differ=0
for f in $(find "$ROOT/netlists" "$ROOT/tests" "$ROOT/docs/examples" -name '*.net' | sort) "$gen"/*.net; do
    count=$((count + 1))
    key=$(printf '%s' "$f" | tr '/' '_')
    for side in old new; do
        if [ "$side" = old ]; then prog=$OLD; else prog=$NEW; fi
        timeout 120 "$prog" sweep "$f" > "$WORK/$key.$side.out" 2> "$WORK/$key.$side.err"
        echo "exit $?" >> "$WORK/$key.$side.err"
    done
    for part in out err; do
        if ! cmp -s "$WORK/$key.old.$part" "$WORK/$key.new.$part"; then
            echo "differs: $f ($part)"
            differ=$((differ + 1))
        fi
    done
done
echo "sameread: $count netlists, $differ differences (outputs in $WORK)"
[ "$differ" -eq 0 ]
