#!/bin/sh
# tests/layers.sh: scripts/layers.py on small made-up trees: a clean tree passes; a cycle, an
# include or a symbol out of reach, an unplaced file and a public header that includes a src/
# header each fail with their file:line; an allowed exception passes; a bad table exits 2.
# Usage: sh tests/layers.sh
tool="/usr/bin/python3 $(pwd)/scripts/layers.py"
cc=${CC:-cc}
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
passed=0
failed=0

ok() { passed=$((passed + 1)); }
bad() { failed=$((failed + 1)); echo "FAIL $*"; sed 's/^/  | /' "$tmp/out" | head -12; }

# tree: a fresh tree with modules low (layer bottom), mid (middle) and high (top); high uses low.
tree() {
    rm -rf "$tmp/t"
    mkdir -p "$tmp/t/src" "$tmp/t/include" "$tmp/t/obj"
    printf '/* public */\nint tb_api(void);\n' >"$tmp/t/include/tbeta.h"
    printf 'int tb_low_f(void);\n' >"$tmp/t/src/low.h"
    printf '#include "low.h"\nint tb_low_f(void) { return 1; }\n' >"$tmp/t/src/low.c"
    printf 'int tb_mid_f(void);\n' >"$tmp/t/src/mid.h"
    printf '#include "mid.h"\nint tb_mid_f(void) { return 2; }\n' >"$tmp/t/src/mid.c"
    printf 'int tb_high_g(void);\n' >"$tmp/t/src/high.h"
    printf '#include "high.h"\n#include "low.h"\nint tb_high_g(void) { return tb_low_f(); }\n' \
        >"$tmp/t/src/high.c"
    printf 'layer bottom: low\nlayer middle: mid\nlayer top: high\n' >"$tmp/t/layers.txt"
}

# run CODE: compiles the tree, runs the tool on it, requires exit code CODE.
run() {
    for c in "$tmp"/t/src/*.c; do
        $cc -std=c11 -g -c -I"$tmp/t/include" -I"$tmp/t/src" "$c" \
            -o "$tmp/t/obj/$(basename "$c" .c).o" || { bad "compile $c"; return; }
    done
    $tool --root "$tmp/t" --table "$tmp/t/layers.txt" "$tmp/t/obj" >"$tmp/out" 2>&1
    rc=$?
    if [ "$rc" -eq "$1" ]; then ok; else bad "$case: exit $rc, expected $1"; fi
}

# has TEXT: the last run's output contains TEXT.
has() {
    if grep -qF -- "$1" "$tmp/out"; then ok; else bad "$case: '$1' not in the output"; fi
}

case=clean
tree
run 0
has "layers: 3 modules, 0 cycles, 0 layer violations"

case=comment
tree
printf '/* #include "high.h" */\n// #include "mid.h"\nint tb_low_f(void);\n' >"$tmp/t/src/low.h"
run 0

case=upward
tree
printf '#include "low.h"\n#include "high.h"\nint tb_low_f(void) { return tb_high_g(); }\n' \
    >"$tmp/t/src/low.c"
run 1
has "cycle 1 of 1, 2 modules: high low"
has "for example: high -> low -> high"
has "src/low.c:2: low includes high.h: bottom is below top"
has "low uses tb_high_g from high: bottom is below top"
has "layers: FAILED: 3 modules, 1 cycle, 2 layer violations"

case=angle-include
tree
printf '#include <mid.h>\nint tb_low_f(void);\n' >"$tmp/t/src/low.h"
run 1
has "src/low.h:1: low includes mid.h: bottom is below middle"

case=allowed
tree
printf '#include "low.h"\n#include "mid.h"\nint tb_low_f(void) { return tb_mid_f(); }\n' \
    >"$tmp/t/src/low.c"
printf 'allow low mid  # low reads mid for now\n' >>"$tmp/t/layers.txt"
run 0
has "layers: 3 modules, 0 cycles, 0 layer violations; allowed: low -> mid"

case=allow-stale
tree
printf 'allow low mid  # no longer needed\n' >>"$tmp/t/layers.txt"
run 0
has "allow low mid is not needed any more"

case=sees
tree
printf 'layer bottom: low\nlayer middle: mid\nlayer top sees bottom: high\n' >"$tmp/t/layers.txt"
printf '#include "high.h"\n#include "mid.h"\nint tb_high_g(void) { return tb_mid_f(); }\n' \
    >"$tmp/t/src/high.c"
run 1
has "src/high.c:2: high includes mid.h: top sees bottom and below, not middle"

case=unplaced
tree
printf 'int tb_extra(void);\n' >"$tmp/t/src/extra.h"
run 1
has "src/extra.h: module 'extra' is in no layer"

case=absent-module
tree
printf 'layer bottom: low planned\nlayer middle: mid\nlayer top: high\n' >"$tmp/t/layers.txt"
run 0

case=public-header
tree
printf '#include "../src/low.h"\n' >>"$tmp/t/include/tbeta.h"
run 1
has "include/tbeta.h:3: includes src/low.h"

case=bad-table
tree
printf 'allow low high\n' >>"$tmp/t/layers.txt"
run 2
has "layers.txt:4: allow low high: say why"

case=twice
tree
printf 'layer extra: low\n' >>"$tmp/t/layers.txt"
run 2
has "layers.txt:4: module 'low' is already in layer 'bottom'"

echo "layers.sh: $passed passed, $failed failed"
[ "$failed" -eq 0 ]
