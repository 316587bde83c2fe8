#!/bin/sh
# tests/check.sh: 'tbeta check' as a user meets it: the netlist library passes, a regressed copy
# fails, exit codes 0/1/2, drift against a saved run, JUnit XML (xmllint), JSON (python),
# identical output for any number of threads, shards that cover every file exactly once.
# Usage: sh tests/check.sh BUILD [WRAPPER]
build=$1
wrap=${2:-}
tb="$wrap $build/tbeta"
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
passed=0
failed=0
py=/usr/bin/python3

ok() { passed=$((passed + 1)); }
bad() { failed=$((failed + 1)); echo "FAIL $*"; }

# expect NAME CODE COMMAND...: runs COMMAND, requires exit code CODE.
expect() {
    name=$1 code=$2
    shift 2
    "$@" >"$tmp/out" 2>"$tmp/err"
    rc=$?
    if [ "$rc" -eq "$code" ]; then ok; else
        bad "$name: exit $rc, expected $code"
        sed 's/^/  | /' "$tmp/out" "$tmp/err" | head -8
    fi
}

# has NAME FILE TEXT: FILE (out or err) contains TEXT.
has() {
    if grep -qF -- "$3" "$tmp/$2"; then ok; else
        bad "$1: '$3' not in std$2"
        sed 's/^/  | /' "$tmp/$2" | head -5
    fi
}

expect help 0 $tb check --help
has help out "--shard I/N"
expect no-paths 2 $tb check
has no-paths err "no netlist or folder given"
expect bad-shard 2 $tb check netlists --shard 0/3
has bad-shard err "--shard needs I/N with 1 <= I <= N, got 0/3"
expect bad-jobs 2 $tb check netlists --jobs 0
expect bad-option 2 $tb check netlists --bogus
has bad-option err "unknown option --bogus"

expect nothing-found 2 $tb check tests/check --glob '*.nothing'
has nothing-found err "no netlist matches '*.nothing' under the paths given"

# the library: every netlist passes, at least 20 of them, each with expectations (exit 0)
expect library 0 $tb check netlists/
has library out "0 failed, 0 could not be checked"
n=$(grep -c '^pass ' "$tmp/out")
if [ "$n" -ge 20 ] && [ "$n" -eq "$(ls netlists/*.net | wc -l)" ]; then ok; else bad "library: $n netlists passed"; fi
if grep -q '(0 expectations)' "$tmp/out"; then bad "library: a netlist without .expect"; else ok; fi
cp "$tmp/out" "$tmp/library.txt"

# the deliberately regressed copy is caught: exit 1, the failing expectation, value and bound
expect regressed 1 $tb check tests/check/regressed
has regressed out "FAIL   tests/check/regressed/twopole_opamp_follower.net:55: G1.unity_hz is 707581 Hz"
has regressed out "tests/check/regressed/twopole_opamp_follower.net:56: G1.phase_margin_deg is 45.6"
has regressed out "expected >= 60 deg"
has regressed out "1 failed, 0 could not be checked; 7 expectations, 4 failed"

# exit 2: an expectation naming no loop (file:line:col, did you mean), a path that does not exist
expect unknown-loop 2 $tb check tests/check/broken
has unknown-loop err "tests/check/broken/unknown_loop.net:8:9: error: unknown loop 'G2' in .expect (did you mean 'G1'?)"
has unknown-loop out "ERROR  tests/check/broken/unknown_loop.net:8:9"
expect missing 2 $tb check tests/check/no_such_folder
has missing out "ERROR  tests/check/no_such_folder: error: cannot read 'tests/check/no_such_folder'"
expect bad-expect 2 $tb check tests/bad/expect_unknown_figure.net
has bad-expect err "did you mean 'phase_margin_deg'?"
expect mixed 2 $tb check netlists tests/check/regressed tests/check/broken
has mixed out "21 passed, 1 failed, 1 could not be checked"

# a configurable glob: the same netlist under another extension
mkdir -p "$tmp/lib/sub"
cp netlists/ota_gain_of_2.net "$tmp/lib/sub/ota.cir"
cp netlists/twostage_gain_of_5.net "$tmp/lib/two.net"
expect glob 0 $tb check "$tmp/lib" --glob '*.cir'
has glob out "1 netlist: 1 passed"
has glob out "sub/ota.cir"

# --save then --against: the same library does not drift; the slightly changed copy, which
# still meets every bound, drifts (the worse way, beyond 1 %) and exits 1
expect save 0 $tb check netlists --save "$tmp/base.json"
expect against-same 0 $tb check netlists --against "$tmp/base.json"
has against-same out "0 figures drifted"
expect drift 1 $tb check tests/check/drift --against "$tmp/base.json"
has drift out "DRIFT  tests/check/drift/twopole_opamp_follower.net: G1.peaking_db drifted: 0.170124 dB, now 0.199254 dB"
has drift out "G1.overshoot_pct drifted"
has drift out "7 expectations, 0 failed; 2 figures drifted"
expect drift-loose 0 $tb check tests/check/drift --against "$tmp/base.json" --drift 20
expect against-missing 2 $tb check netlists --against "$tmp/none.json"

# JUnit XML is valid (xmllint, Debian's libxml2-utils), also with & < > " ' in a path
mkdir -p "$tmp/odd"
cp tests/check/regressed/twopole_opamp_follower.net "$tmp/odd/a&b<c>\"q'.net"
expect junit 2 $tb check netlists tests/check/regressed tests/check/broken "$tmp/odd" --junit "$tmp/j.xml"
if xmllint --noout "$tmp/j.xml" 2>"$tmp/err"; then ok; else bad "junit: xmllint"; head -5 "$tmp/err"; fi
if grep -q '<failure type="expectation"' "$tmp/j.xml" && grep -q '<error type="netlist"' "$tmp/j.xml" &&
    grep -qF 'a&amp;b&lt;c&gt;&quot;q&apos;.net' "$tmp/j.xml"; then ok; else bad "junit: content"; fi
tests=$(xmllint --xpath 'count(//testcase)' "$tmp/j.xml")
fails=$(xmllint --xpath 'count(//testcase/failure)' "$tmp/j.xml")
# one testcase per expectation: the library's, twice the regressed copy's 7, one for the error
want=$(($(sed -n 's/.*; \([0-9]*\) expectations,.*/\1/p' "$tmp/library.txt") + 7 + 7 + 1))
if [ "$tests" -eq "$want" ] && [ "$fails" -eq 8 ]; then ok; else
    bad "junit: $tests testcases (want $want), $fails failures (want 8)"; fi

# --json parses, and agrees with the text summary
expect json 2 $tb check netlists tests/check/regressed tests/check/broken --json "$tmp/r.json"
if $py - "$tmp/r.json" <<'EOF'; then ok; else bad "json: content"; fi
import json, sys
d = json.load(open(sys.argv[1]))
assert d["format"] == "tbeta-check" and d["exit_code"] == 2
st = [n["status"] for n in d["netlists"]]
assert st.count("pass") == 21 and st.count("fail") == 1 and st.count("error") == 1, st
for n in d["netlists"]:
    if n["status"] != "error":
        assert n["expectations"] and n["loops"]
        for x in n["expectations"]:
            assert isinstance(x["pass"], bool) and x["bound"] and x["measured"]
paths = [n["path"] for n in d["netlists"]]
assert paths == sorted(paths)
EOF

# the number of threads changes nothing in the output
expect jobs1 0 $tb check netlists --jobs 1 --json "$tmp/j1.json"
cp "$tmp/out" "$tmp/jobs1.txt"
expect jobs2 0 $tb check netlists --jobs 2 --json "$tmp/j2.json"
if cmp -s "$tmp/out" "$tmp/jobs1.txt" && cmp -s "$tmp/j1.json" "$tmp/j2.json"; then ok; else
    bad "jobs: --jobs 1 and --jobs 2 differ"; fi

# shards: 3 shards cover every netlist exactly once, and their merged results equal one run
: >"$tmp/shards.txt"
for i in 1 2 3; do
    expect "shard $i/3" 0 $tb check netlists --shard $i/3 --json "$tmp/s$i.json"
    grep '^pass ' "$tmp/out" >>"$tmp/shards.txt"
done
sort "$tmp/shards.txt" >"$tmp/shards.sorted"
grep '^pass ' "$tmp/library.txt" | sort >"$tmp/library.sorted"
if cmp -s "$tmp/shards.sorted" "$tmp/library.sorted"; then ok; else bad "shards: not every netlist exactly once"; fi
expect merge 0 $tb check --merge "$tmp/s1.json" "$tmp/s2.json" "$tmp/s3.json" --json "$tmp/m.json" \
    --junit "$tmp/m.xml"
if cmp -s "$tmp/out" "$tmp/library.txt" && cmp -s "$tmp/m.json" "$tmp/j1.json"; then ok; else
    bad "merge: merged shards differ from one run"; fi
if xmllint --noout "$tmp/m.xml"; then ok; else bad "merge: junit"; fi
expect merge-save 2 $tb check --merge "$tmp/base.json"
has merge-save err "a --save file has no results"

echo "check: $passed passed, $failed failed"
[ "$failed" -eq 0 ]
