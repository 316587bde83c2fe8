#!/bin/sh
# tests/run.sh: runs every test program in BUILD/tests, the outside-reference scripts and the
# layer check over BUILD/obj, then prints one closing line "tests: N passed, M failed".
# Usage: sh tests/run.sh BUILD [WRAPPER]
build=$1
wrap=${2:-}
passed=0
failed=0
for t in "$build"/tests/test_*; do
    [ -x "$t" ] || continue
    if $wrap "$t"; then passed=$((passed + 1)); else failed=$((failed + 1)); echo "FAILED: $t"; fi
done
if sh tests/cli.sh "$build" "$wrap"; then passed=$((passed + 1)); else
    failed=$((failed + 1)); echo "FAILED: tests/cli.sh"; fi
if sh tests/help.sh "$build" "$wrap"; then passed=$((passed + 1)); else
    failed=$((failed + 1)); echo "FAILED: tests/help.sh"; fi
if sh tests/check.sh "$build" "$wrap"; then passed=$((passed + 1)); else
    failed=$((failed + 1)); echo "FAILED: tests/check.sh"; fi
if sh tests/install.sh "$build" "$wrap"; then passed=$((passed + 1)); else
    failed=$((failed + 1)); echo "FAILED: tests/install.sh"; fi
if sh tests/browser.sh "$build"; then passed=$((passed + 1)); else
    failed=$((failed + 1)); echo "FAILED: tests/browser.sh"; fi
for s in tests/ref/*.py; do
    [ -f "$s" ] || continue
    if /usr/bin/python3 "$s" "$build/tbeta" netlists/*.net tests/ref/*.net; then
        passed=$((passed + 1))
    else
        failed=$((failed + 1)); echo "FAILED: $s"
    fi
done
# module cycles and layer violations (scripts/layers.txt), and the layer check's own test
if /usr/bin/python3 scripts/layers.py "$build/obj"; then passed=$((passed + 1)); else
    failed=$((failed + 1)); echo "FAILED: scripts/layers.py $build/obj"; fi
if sh tests/layers.sh; then passed=$((passed + 1)); else
    failed=$((failed + 1)); echo "FAILED: tests/layers.sh"; fi
echo "tests: $passed passed, $failed failed"
[ "$failed" -eq 0 ]
