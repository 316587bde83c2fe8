#!/bin/sh
# tests/cli.sh: the command line as a user meets it: exit codes 0/2, messages on stderr,
# valid JSON, no NaN or Inf in any output. Usage: sh tests/cli.sh BUILD [WRAPPER]
build=$1
wrap=${2:-}
tb="$wrap $build/tbeta"
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
passed=0
failed=0

# expect NAME CODE COMMAND...: runs COMMAND, requires exit code CODE.
expect() {
    name=$1 code=$2
    shift 2
    "$@" >"$tmp/out" 2>"$tmp/err"
    rc=$?
    if [ "$rc" -eq "$code" ]; then
        passed=$((passed + 1))
    else
        failed=$((failed + 1))
        echo "FAIL $name: exit $rc, expected $code"
        sed 's/^/  | /' "$tmp/err" | head -5
    fi
}

# has NAME FILE TEXT: FILE (out or err) contains TEXT.
has() {
    if grep -qF -- "$3" "$tmp/$2"; then
        passed=$((passed + 1))
    else
        failed=$((failed + 1))
        echo "FAIL $1: '$3' not in std$2"
        sed 's/^/  | /' "$tmp/$2" | head -5
    fi
}

expect version 0 $tb --version
has version out "tbeta "
expect help 0 $tb --help
has help out "exit codes"
expect report-help 0 $tb report --help
expect sweep-help 0 $tb sweep --help
has sweep-help out "freq_hz,T_re,T_im,A_re,A_im,Ainf_re,Ainf_im,A0_re,A0_im"
expect no-args 2 $tb
expect unknown-option 2 $tb report netlists/photodiode_tia.net --bogus
has unknown-option err "unknown option --bogus"
expect missing-file 2 $tb tests/cli/no_such_file.net
has missing-file err "tests/cli/no_such_file.net: error: cannot read 'tests/cli/no_such_file.net'"
expect unknown-loop 2 $tb sweep netlists/photodiode_tia.net --loop Q7
has unknown-loop err "no .loop at 'Q7'"

# a structurally singular circuit is refused before solving, naming the culprits, exit 2
expect singular 2 $tb tests/cli/singular_vloop.net
has singular err "singular_vloop.net:3:1: error: loop of voltage sources: V1, V2: singular at every frequency"
expect floating 2 $tb tests/cli/floating_node.net
has floating err "floating_node.net:6:1: error: node 'f' has no path to ground"

# .margins in the netlist makes a missed threshold exit 1; the command line overrides its value
expect margins-stated 1 $tb tests/cli/margins_stated.net
has margins-stated err "loop E1: phase margin 5.782 deg is below 60 deg"
has margins-stated out "needs |PM| >= 60: FAILS"
expect margins-override 0 $tb tests/cli/margins_stated.net --pm-min 5
has margins-override out "needs |PM| >= 5: ok"

# --jobs: threads share the sweep's points; every output is the same byte for byte
expect jobs-bad 2 $tb report netlists/photodiode_tia.net --jobs 0
has jobs-bad err "--jobs needs a whole number from 1 to 1024, got 0"
for f in netlists/noninverting_loaded_opamp.net tests/fb/noninverting_x20.net tests/ref/ref_lc_twoloop.net; do
    for form in "report --json --all-sources" "sweep --csv"; do
        $tb $form "$f" --jobs 1 >"$tmp/jobs1" 2>&1
        $tb $form "$f" --jobs 2 >"$tmp/jobs2" 2>&1
        if cmp -s "$tmp/jobs1" "$tmp/jobs2"; then passed=$((passed + 1)); else
            failed=$((failed + 1)); echo "FAIL jobs $f $form: --jobs 2 differs from --jobs 1"; fi
    done
done

# every malformed netlist: exit 2 and the first line of stderr as stated in its .err file
for f in tests/bad/*.net; do
    [ -f "$f" ] || continue
    expect "bad $f" 2 $tb "$f"
    want=$(cat "${f%.net}.err")
    got=$(head -n 1 "$tmp/err")
    if [ "$got" = "$want" ]; then passed=$((passed + 1)); else
        failed=$((failed + 1)); echo "FAIL bad $f: first line '$got', expected '$want'"; fi
done

# every example of docs/netlist.md runs (subcircuits, parameters, includes, K) and its JSON parses
for f in docs/examples/*.net; do
    [ -f "$f" ] || continue
    expect "example $f" 0 $tb report "$f" --json
    if /usr/bin/python3 -c 'import json,sys; d=json.load(open(sys.argv[1])); assert d["loops"]' "$tmp/out"; then
        passed=$((passed + 1)); else failed=$((failed + 1)); echo "FAIL example $f: not valid JSON"; fi
    cat "$tmp/out" >>"$tmp/all"
done

# every demo: report, JSON and CSV run, JSON parses, nothing prints nan or inf
for f in netlists/*.net tests/ref/*.net; do
    expect "report $f" 0 $tb "$f"
    has "report $f" out "caution: tbeta is a small-signal, linear analysis"
    expect "json $f" 0 $tb report "$f" --json
    if /usr/bin/python3 -c 'import json,sys; d=json.load(open(sys.argv[1])); assert d["loops"]' "$tmp/out"; then
        passed=$((passed + 1)); else failed=$((failed + 1)); echo "FAIL json $f: not valid JSON"; fi
    for l in $(/usr/bin/python3 -c 'import json,sys; print(" ".join(x["source"] for x in json.load(open(sys.argv[1]))["loops"]))' "$tmp/out"); do
        expect "csv $f $l" 0 $tb sweep "$f" --csv --loop "$l"
        cat "$tmp/out" >>"$tmp/all"
    done
    $tb report "$f" --json >>"$tmp/all" 2>/dev/null
    $tb report "$f" >>"$tmp/all" 2>/dev/null
done
if grep -qiE '(^|[^a-z_])(nan|inf|infinity)([^a-z_]|$)' "$tmp/all"; then
    failed=$((failed + 1)); echo "FAIL: nan or inf reached an output:"; grep -iE '(^|[^a-z_])(nan|inf|infinity)([^a-z_]|$)' "$tmp/all" | head -3
else
    passed=$((passed + 1))
fi

echo "cli: $passed passed, $failed failed"
[ "$failed" -eq 0 ]
