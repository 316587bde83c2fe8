#!/bin/sh
# tests/help.sh: help cannot fall behind the parser. Reads the table of accepted options in
# src/main.c (accepted_options: the parsers refuse any option not in it) and checks that every
# row's option appears, as a word, in its subcommand's --help; then that an option outside the
# table is refused (exit 2, "unknown option"). Usage: sh tests/help.sh BUILD [WRAPPER]
build=$1
wrap=${2:-}
tb="$wrap $build/tbeta"
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
passed=0
failed=0
# the rows {"command", "--option"} between "accepted_options[] = {" and the closing "};"
sed -n '/accepted_options\[\] = {/,/^};/p' src/main.c | grep -o '{"[a-z]*", "--[a-z-]*"}' |
    sed 's/{"\([a-z]*\)", "\(--[a-z-]*\)"}/\1 \2/' >"$tmp/rows"
rows=$(wc -l <"$tmp/rows")
if [ "$rows" -lt 40 ]; then
    echo "help: FAIL only $rows rows read from the option table of src/main.c"
    exit 1
fi
while read -r cmd opt; do
    $tb "$cmd" --help >"$tmp/help" 2>&1 || { failed=$((failed + 1)); echo "help: FAIL tbeta $cmd --help exits non-zero"; continue; }
    if grep -Eq -- "(^|[^a-z-])$opt([^a-z-]|\$)" "$tmp/help"; then
        passed=$((passed + 1))
    else
        failed=$((failed + 1))
        echo "help: FAIL tbeta $cmd accepts $opt but its --help does not list it"
    fi
done <"$tmp/rows"
# every subcommand has a table and a help
for cmd in report sweep step plot check; do
    grep -q "^$cmd " "$tmp/rows" || { failed=$((failed + 1)); echo "help: FAIL no row for $cmd"; }
done
# an option outside the table is refused, even one another subcommand takes
for args in "plot netlists/ota_gain_of_2.net --svg $tmp/p --csv" "step netlists/ota_gain_of_2.net --json" \
    "check netlists --svg $tmp/q" "sweep netlists/ota_gain_of_2.net --at 1k"; do
    # shellcheck disable=SC2086
    $tb $args >/dev/null 2>"$tmp/err"
    rc=$?
    if [ "$rc" -eq 2 ] && grep -q "unknown option" "$tmp/err"; then passed=$((passed + 1)); else
        failed=$((failed + 1)); echo "help: FAIL tbeta $args: exit $rc, wanted 2 with unknown option"; fi
done
echo "help: $passed passed, $failed failed ($rows options in the table)"
[ "$failed" -eq 0 ]
