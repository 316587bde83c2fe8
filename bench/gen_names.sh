#!/bin/sh
# bench/gen_names.sh: writes a netlist with many names to look up: .param cards or subcircuit definitions
# Usage: sh bench/gen_names.sh params|subckts COUNT > FILE
#   params   COUNT .param cards p0..p{COUNT-1}; p_i = {p_(i/2) + 1} leans on one defined
#            earlier, and each of 100 resistors R1..R100 uses one spread over the list
#   subckts  COUNT definitions s0..s{COUNT-1} of one resistor each, written before their
#            use, then one instance of every tenth; COUNT up to 2 000 000 (instances are
#            limited to 200 000)
# The circuit around them: V1 drives a follower E1 (.loop E1) loaded by the resistors.
set -eu
kind=${1:?usage: gen_names.sh params|subckts COUNT}
count=${2:?usage: gen_names.sh params|subckts COUNT}
awk -v kind="$kind" -v n="$count" 'BEGIN {
    print "Many names, generated for the benchmark (" kind ", " n ")"
    print "V1 in 0 AC 1"
    print "E1 out 0 in out 100k"
    print ".loop E1"
    print ".ac dec 1 1 10"
    if (kind == "params") {
        print ".param p0=1k"
        for (i = 1; i < n; i++)
            printf ".param p%d={p%d+1}\n", i, int(i / 2)
        for (r = 1; r <= 100; r++)
            printf "R%d out 0 {p%d}\n", r, int((r - 1) * (n - 1) / 99)
    } else {
        for (i = 0; i < n; i++)
            printf ".subckt s%d a\nR1 a 0 %dk\n.ends\n", i, 1 + i % 100
        for (i = 0; i < n; i += 10)
            printf "X%d out s%d\n", i, i
    }
}'
