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
if [ "$n" -ge 20 ] && [ "$n" -eq "$(find netlists -name '*.net' | wc -l)" ]; then ok; else bad "library: $n netlists passed"; fi
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
nlib=$(find netlists -name '*.net' | wc -l)  # netlists/ and netlists/devices/
has mixed out "$nlib passed, 1 failed, 1 could not be checked"

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
if $py - "$tmp/r.json" "$nlib" <<'EOF'; then ok; else bad "json: content"; fi
import json, sys
d = json.load(open(sys.argv[1]))
assert d["format"] == "tbeta-check" and d["exit_code"] == 2
st = [n["status"] for n in d["netlists"]]
assert st.count("pass") == int(sys.argv[2]) and st.count("fail") == 1 and st.count("error") == 1, st
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

# ---- hostile and unlucky input (issue 12) -------------------------------------------------

# lacks NAME FILE TEXT: FILE (out or err) does not contain TEXT.
lacks() {
    if grep -qF -- "$3" "$tmp/$2"; then bad "$1: '$3' in std$2"; sed 's/^/  | /' "$tmp/$2" | head -5; else ok; fi
}

# same NAME A B: files A and B are byte for byte the same.
same() {
    if cmp -s "$2" "$3"; then ok; else bad "$1: $2 and $3 differ"; fi
}

# 1. a --save (or --json, --junit) that fails midway leaves the old file byte-identical: a
# file-size limit of 1 block (512 bytes) stops the write; the old files are larger
cp "$tmp/base.json" "$tmp/base.orig"
cp "$tmp/r.json" "$tmp/r.orig"
cp "$tmp/j.xml" "$tmp/j.orig"
expect save-limit 2 sh -c "ulimit -f 1; exec $tb check netlists --save '$tmp/base.json' --json '$tmp/r.json' --junit '$tmp/j.xml' >/dev/null"
has save-limit err "tbeta: cannot write '$tmp/base.json': a write failed: File too large (the previous file is left as it was)"
same save-limit "$tmp/base.json" "$tmp/base.orig"
same save-limit "$tmp/r.json" "$tmp/r.orig"
same save-limit "$tmp/j.xml" "$tmp/j.orig"
if ls -A "$tmp" | grep -q '\.tmp$'; then bad "save-limit: a temporary file stayed behind"; else ok; fi
# ... and a folder that cannot be written (as root, permissions do not stop a write: skipped)
if [ "$(id -u)" -ne 0 ]; then
    mkdir "$tmp/ro" && cp "$tmp/base.orig" "$tmp/ro/base.json" && chmod a-w "$tmp/ro"
    expect save-readonly 2 $tb check netlists --save "$tmp/ro/base.json"
    has save-readonly err "cannot create a file beside it"
    same save-readonly "$tmp/ro/base.json" "$tmp/base.orig"
    chmod u+w "$tmp/ro"
fi
# a path that is not a regular file is written as it is; a symbolic link stays a link
expect save-devnull 0 $tb check netlists/ota_gain_of_2.net --save /dev/null
ln -s base.json "$tmp/base.link"
expect save-link 0 $tb check netlists --save "$tmp/base.link"
if [ -L "$tmp/base.link" ]; then ok; else bad "save-link: the link was replaced by a file"; fi
same save-link "$tmp/base.json" "$tmp/base.orig"

# 2. a save replaces the file, it does not rewrite it: a reader holding the old file (here a
# hard link to it) keeps the old content whole while the new one appears under the name
expect save-small 0 $tb check netlists/ota_gain_of_2.net --save "$tmp/swap.json"
cp "$tmp/swap.json" "$tmp/swap.small"
ln "$tmp/swap.json" "$tmp/swap.held"
expect save-over 0 $tb check netlists --save "$tmp/swap.json"
same save-over "$tmp/swap.held" "$tmp/swap.small"
same save-over "$tmp/swap.json" "$tmp/base.orig"
# two runs saving to one file while a third compares with it: the reader never sees part of one
( for i in 1 2 3; do $tb check netlists/ota_gain_of_2.net --save "$tmp/swap.json" >/dev/null; done ) &
( for i in 1 2 3; do $tb check netlists --save "$tmp/swap.json" --jobs 1 >/dev/null; done ) &
torn=0
for i in 1 2 3 4 5 6; do
    $tb check netlists/ota_gain_of_2.net --against "$tmp/swap.json" >/dev/null 2>"$tmp/err" || torn=1
done
wait
if [ "$torn" -eq 0 ]; then ok; else bad "save-concurrent: a reader failed"; cat "$tmp/err"; fi

# 3. bytes that are not UTF-8 in a file name, a node and a source name: every writer takes
# them (each such byte is the character of its value, U+0080..U+00FF), the baseline finds
# its record again, and merge takes the JSON
mkdir -p "$tmp/latin1"
cp tests/cli/odd_bytes.net "$tmp/latin1/verst$(printf '\344')rker.net"
expect odd-bytes 0 $tb check "$tmp/latin1" --json "$tmp/o.json" --junit "$tmp/o.xml" --save "$tmp/o-base.json"
if $py - "$tmp/o.json" "$tmp/o-base.json" <<'PY'; then ok; else bad "odd-bytes: JSON"; fi
import json, sys
for f in sys.argv[1:]:
    d = json.load(open(f, encoding="utf-8"))
    n = d["netlists"][0]
    assert n["path"].endswith("/verst\u00e4rker.net"), n["path"]
    assert n["loops"][0]["name"] == "G\u00e41", n["loops"][0]["name"]
PY
if xmllint --noout "$tmp/o.xml" 2>"$tmp/err"; then ok; else bad "odd-bytes: xmllint"; head -3 "$tmp/err"; fi
expect odd-bytes-against 0 $tb check "$tmp/latin1" --against "$tmp/o-base.json"
lacks odd-bytes-against out "not in the baseline"
expect odd-bytes-merge 0 $tb check --merge "$tmp/o.json" --json "$tmp/o2.json"
same odd-bytes-merge "$tmp/o.json" "$tmp/o2.json"

# 4. baselines and shard results are checked whole before use: a figure given as a string, a
# netlist recorded twice, a later format version, a made-up status, a status that its
# results contradict; the same shard merged twice. Each hid a real drift or counted twice.
$py - "$tmp" <<'PY'
import json, sys, copy
t = sys.argv[1]
base = json.load(open(t + "/base.json"))
full = json.load(open(t + "/s1.json"))
def save(name, d):
    json.dump(d, open(t + "/" + name, "w"))
def twopole(d):
    return [n for n in d["netlists"] if n["path"].endswith("/twopole_opamp_follower.net")][0]
d = copy.deepcopy(base)
figs = twopole(d)["loops"][0]["figures"]
figs["peaking_db"] = str(figs["peaking_db"])
figs["overshoot_pct"] = str(figs["overshoot_pct"])
save("t-string.json", d)
d = copy.deepcopy(base)
d["netlists"].append(copy.deepcopy(twopole(d)))
save("t-twice.json", d)
d = copy.deepcopy(base)
d["version"] = 2
save("t-version.json", d)
d = copy.deepcopy(base)
twopole(d)["loops"][0]["figures"]["verdict"] = "fine"
save("t-word.json", d)
d = copy.deepcopy(full)
d["netlists"][0]["status"] = "skipped"
save("t-status.json", d)
d = copy.deepcopy(full)
d["netlists"][0]["expectations"][0]["pass"] = False
save("t-liar.json", d)
PY
expect baseline-string 2 $tb check tests/check/drift --against "$tmp/t-string.json"
has baseline-string err "t-string.json: netlist 'netlists/twopole_opamp_follower.net': loop 'G1': figure 'peaking_db' is a string, not a number or null"
expect baseline-twice 2 $tb check tests/check/drift --against "$tmp/t-twice.json"
has baseline-twice err "t-twice.json: netlist 'netlists/twopole_opamp_follower.net' has two records: a file holds one run"
expect baseline-version 2 $tb check tests/check/drift --against "$tmp/t-version.json"
has baseline-version err "t-version.json: written in format version 2 by a newer tbeta; this one reads version 1"
expect baseline-word 2 $tb check tests/check/drift --against "$tmp/t-word.json"
has baseline-word err "figure 'verdict' is 'fine', not a word of that figure"
expect merge-status 2 $tb check --merge "$tmp/t-status.json"
has merge-status err "unknown status 'skipped' (pass, fail or error)"
expect merge-liar 2 $tb check --merge "$tmp/t-liar.json"
has merge-liar err "status 'pass' with a failed expectation or a drift"
expect merge-twice 2 $tb check --merge "$tmp/s1.json" "$tmp/s2.json" "$tmp/s1.json"
has merge-twice err "s1.json: netlist '"
has merge-twice err "' is already in an earlier merged file (each shard's file once)"
printf '[1, 2]\n' >"$tmp/t-array.json"
expect baseline-array 2 $tb check tests/check/drift --against "$tmp/t-array.json"
has baseline-array err "t-array.json: not a 'tbeta check' --save or --json file"

# 8. symbolic links: a link to the folder itself, to its parent, and to a file of the library
# make no netlist checked twice, and a file reached directly and through a link is checked
# under its direct path (a cycle used to be searched 64 levels deep, without end)
mkdir -p "$tmp/links/sub"
cp netlists/ota_gain_of_2.net "$tmp/links/a.net"
cp netlists/twostage_gain_of_5.net "$tmp/links/sub/b.net"
ln -s . "$tmp/links/self"
ln -s .. "$tmp/links/sub/up"
ln -s ../a.net "$tmp/links/sub/0-link.net"
ln -s sub "$tmp/links/0-sub"
ln -s nowhere "$tmp/links/README"
expect links 0 timeout 60 $tb check "$tmp/links" "$tmp/links/a.net" "$tmp/links/sub"
has links out "2 netlists: 2 passed"
has links out "pass   $tmp/links/a.net"
has links out "pass   $tmp/links/sub/b.net"
# the same file named twice is checked once
expect file-twice 0 $tb check netlists/ota_gain_of_2.net ./netlists/ota_gain_of_2.net
has file-twice out "1 netlist: 1 passed"

# 13. a file name holding a newline cannot forge a line, an escape sequence in a card does not
# reach the terminal (stdout or stderr)
mkdir -p "$tmp/forge"
cp tests/check/regressed/twopole_opamp_follower.net "$tmp/forge/x
pass   forged.net"
printf 'escape in a loop name\nV1 in 0 AC 1\nE1 out 0 in 0 2\nR1 out 0 1k\n.loop E1\n.ac dec 10 1 1k\n.expect E1\033[2J.dc.T = 1 +-1%%\n.end\n' >"$tmp/forge/esc.net"
expect forge 2 $tb check "$tmp/forge" --junit "$tmp/forge.xml"
if grep -q '^pass ' "$tmp/out"; then bad "forge: a forged pass line"; else ok; fi
has forge out 'x\x0Apass   forged.net:55: G1.unity_hz is 707581 Hz'
esc=$(printf '\033')
lacks forge out "$esc"
lacks forge err "$esc"
has forge err '\x1B[2J'
if xmllint --noout "$tmp/forge.xml" 2>"$tmp/err"; then ok; else bad "forge: xmllint"; head -3 "$tmp/err"; fi

# 14. a standard output that cannot be written: exit 2 and a message
expect stdout-full 2 sh -c "exec $tb check netlists/ota_gain_of_2.net >/dev/full"
has stdout-full err "tbeta: cannot write the output: No space left on device"

# 5. .include stays inside the library by default: a netlist reaching outside its argument's
# folder is an error entry; --include-anywhere lifts it; --include-root names another folder
mkdir -p "$tmp/inc/lib" "$tmp/incout"
printf '* the stage, kept outside the library\nE1 out 0 in 0 2\nR1 out 0 1k\n' >"$tmp/incout/stage.net"
printf 'a library netlist that includes a file outside the library\nV1 in 0 AC 1\n.include ../../incout/stage.net\n.loop E1\n.io V1 v(out)\n.ac dec 5 1 1k\n.expect E1.dc.A = 2 +-1%%\n.end\n' \
    >"$tmp/inc/lib/reach.net"
expect include-confined 2 $tb check "$tmp/inc"
has include-confined out "outside the include root"
expect include-anywhere 0 $tb check "$tmp/inc" --include-anywhere
expect include-root 0 $tb check "$tmp/inc" --include-root "$tmp"
expect include-report 0 $tb report "$tmp/inc/lib/reach.net"
expect include-report-root 2 $tb report "$tmp/inc/lib/reach.net" --include-root "$tmp/inc"
has include-report-root err "outside the include root"

echo "check: $passed passed, $failed failed"
[ "$failed" -eq 0 ]
