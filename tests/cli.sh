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

# thresholds apply to every margin wherever it lies on the axis (issue 11; figures from
# tests/ref/stability_check.py): a gain margin of 4.44 dB just above the sweep
expect gm-above 1 $tb tests/stab/stab_gm_above_sweep.net --gm-min 10
has gm-above err "loop G1: the loop gain may rise by only 4.437 dB (needs 10 dB)"
has gm-above out "[above the sweep]"
expect gm-above-strict 1 $tb tests/stab/stab_gm_above_sweep.net --strict
expect gm-above-met 0 $tb tests/stab/stab_gm_above_sweep.net --gm-min 4
# a phase margin of 46.9 degrees above an audio-band sweep
expect pm-above 1 $tb tests/stab/stab_pm_above_sweep.net --pm-min 60
has pm-above err "loop G1: phase margin 46.931 deg is below 60 deg"
expect pm-above-strict 0 $tb tests/stab/stab_pm_above_sweep.net --strict
# conditionally stable, its lower critical gain (9.4 dB down) below the sweep
expect conditional-down 1 $tb tests/stab/stab_conditional_below_sweep.net --gm-min 10 --pm-min 30
has conditional-down err "loop G1: the loop gain may fall by only 9.405 dB (needs 10 dB)"
# its upper critical gain is 71.2 dB up: beyond the default gain-margin cap of 60 dB, a bound
has conditional-down out "the loop gain may rise by more than 60 dB (the cap) / fall by 9.405 dB (at 385.01 Hz) before instability"
has conditional-down out "where |T| is below the gain-margin cap (--gm-cap) its phase is not followed"
expect conditional-uncapped 1 $tb tests/stab/stab_conditional_below_sweep.net --gm-min 10 --pm-min 30 --gm-cap 0
has conditional-uncapped out "the loop gain may rise by 71.249 dB (at 999.21 kHz) / fall by 9.405 dB (at 385.01 Hz) before instability"
expect conditional-cap-80 1 $tb tests/stab/stab_conditional_below_sweep.net --gm-min 10 --pm-min 30 --gm-cap 80
has conditional-cap-80 out "the loop gain may rise by 71.249 dB (at 999.21 kHz)"
expect conditional-cap-bad 2 $tb tests/stab/stab_conditional_below_sweep.net --gm-cap -3
expect conditional-met 0 $tb tests/stab/stab_conditional_below_sweep.net --gm-min 9 --pm-min 30
# T(0) = -0.4: DC is a critical point, 7.96 dB up
expect positive-dc 1 $tb tests/stab/stab_positive_dc.net --gm-min 10
has positive-dc out "the loop gain may rise by 7.959 dB (at DC) before instability"
expect positive-dc-met 0 $tb tests/stab/stab_positive_dc.net --gm-min 7
# two unity crossings: the headline is the -37 degree one, in a stable loop |PM| counts
expect two-unity 0 $tb tests/stab/stab_two_unity.net --pm-min 30
has two-unity out "unity loop gain |T| = 1 at     33.333 Hz   (the headline crossing, 1 of 2)"
expect two-unity-fails 1 $tb tests/stab/stab_two_unity.net --pm-min 40
# margins that cannot be determined fail --strict, and say why
expect unsettled 0 $tb tests/cli/margins_unsettled.net
has unsettled out "T did not settle to its high-frequency asymptote within the search"
expect unsettled-strict 1 $tb tests/cli/margins_unsettled.net --strict
has unsettled-strict err "loop G1: the margins could not be determined (see the notes)"
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

# a control code in a rejected card is escaped in the quoted line: nothing reaches the terminal raw
expect "escaped line" 2 $tb tests/bad/control_char.net
has "escaped line" err 'Rg fb 0 \x1B[1m1k'
if LC_ALL=C grep -q "$(printf '\033')" "$tmp/err"; then
    failed=$((failed + 1)); echo "FAIL escaped line: an ESC byte reached stderr"; else passed=$((passed + 1)); fi

# a file that is not a netlist is named, never quoted; nothing blocks on a FIFO or reads a device forever
for f in tests/bad/include_binary.net tests/bad/include_foreign.net tests/bad/binary_netlist.net; do
    expect "not quoted $f" 2 $tb "$f"
    if grep -q SECRET "$tmp/err"; then
        failed=$((failed + 1)); echo "FAIL not quoted $f: the file's content reached stderr"; else passed=$((passed + 1)); fi
done
mkfifo "$tmp/pipe.net"
expect "fifo netlist" 2 timeout 20 $tb "$tmp/pipe.net"
has "fifo netlist" err "cannot read '$tmp/pipe.net': not a regular file (a FIFO)"
printf 'Includes a FIFO\nV1 a 0 AC 1\nE1 b 0 a 0 2\nRb b 0 1k\n.loop E1\n.include pipe.net\n' >"$tmp/fifo_inc.net"
expect "fifo include" 2 timeout 20 $tb "$tmp/fifo_inc.net"
has "fifo include" err "fifo_inc.net:6:10: error: cannot read '$tmp/pipe.net': not a regular file (a FIFO)"
expect "device netlist" 2 timeout 20 $tb /dev/zero
has "device netlist" err "/dev/zero: error: cannot read '/dev/zero': not a regular file (a character device)"

# every example of docs/netlist.md runs (subcircuits, parameters, includes, K) and its JSON parses
for f in docs/examples/*.net; do
    [ -f "$f" ] || continue
    expect "example $f" 0 $tb report "$f" --json
    if /usr/bin/python3 -c 'import json,sys; d=json.load(open(sys.argv[1])); assert d["loops"]' "$tmp/out"; then
        passed=$((passed + 1)); else failed=$((failed + 1)); echo "FAIL example $f: not valid JSON"; fi
    cat "$tmp/out" >>"$tmp/all"
done

# every demo: report, JSON and CSV run, JSON parses, nothing prints nan or inf
for f in netlists/*.net netlists/devices/*.net tests/ref/*.net; do
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

# ---- hostile and unlucky input (issue 12) -------------------------------------------------

# full NAME COMMAND...: COMMAND with its stdout on /dev/full fails, exit 2, saying so
full() {
    name=$1
    shift
    expect "$name" 2 sh -c 'exec "$@" >/dev/full' sh "$@"
    has "$name" err "tbeta: cannot write the output: "
}
full full-help $tb --help
full full-version $tb --version
full full-check-help $tb check --help
full full-report $tb report netlists/ota_gain_of_2.net
full full-json $tb report netlists/ota_gain_of_2.net --json
full full-sweep $tb sweep netlists/ota_gain_of_2.net
full full-step $tb step netlists/ota_gain_of_2.net

# a threshold below zero is refused, not replaced by the default
expect pm-negative 2 $tb report netlists/ota_gain_of_2.net --pm-min -5
has pm-negative err "tbeta: --pm-min needs 0 or more degrees, got -5"
expect gm-negative 2 $tb report netlists/ota_gain_of_2.net --gm-min -0.5
has gm-negative err "tbeta: --gm-min needs 0 or more dB, got -0.5"
expect pm-zero 0 $tb report netlists/ota_gain_of_2.net --pm-min 0 --gm-min 0

# bytes that are not UTF-8 in the title and in node and source names (tests/cli/odd_bytes.net):
# the JSON report holds them as the characters of their values, the text report escapes only
# control characters (the title's escape sequence), so nothing reaches the terminal raw
esc=$(printf '\033')
expect odd-json 0 $tb report tests/cli/odd_bytes.net --json
if /usr/bin/python3 - "$tmp/out" <<'PY'; then passed=$((passed + 1)); else failed=$((failed + 1)); echo "FAIL odd-json: content"; fi
import json, sys
d = json.load(open(sys.argv[1], encoding="utf-8"))
assert d["title"].startswith("Verst\u00e4rker \x1b[31mred title"), d["title"]
assert d["loops"][0]["source"] == "G\u00e41" and d["output"] == "v(aus\u00e4)", d["output"]
assert d["loops"][0]["feedback"]["impedances"]["ports"][0]["name"] == "p\u00e4"
PY
expect odd-text 0 $tb report tests/cli/odd_bytes.net
has odd-text out 'title   Verstärker \x1B[31mred title\x1B[0m'
has odd-text out 'loop at Gä1'
if grep -qF "$esc" "$tmp/out"; then failed=$((failed + 1)); echo "FAIL odd-text: an escape byte in stdout"
else passed=$((passed + 1)); fi
# an escape sequence in a rejected card and in a file name is escaped on stderr
mkdir -p "$tmp/odd"
printf 'escape in a card\nV1 in 0 AC 1\nE1 out 0 in 0 2\nR1 out 0 1k\n.loop E1\n.ac dec 10 1 1k\n.io V1 v(out)\nX\033]0;title\007 a b\n.end\n' \
    >"$tmp/odd/card$esc[7m.net"
expect odd-card 2 $tb report "$tmp/odd/card$esc[7m.net"
has odd-card err 'card\x1B[7m.net:8:'
if grep -qF "$esc" "$tmp/err"; then failed=$((failed + 1)); echo "FAIL odd-card: an escape byte in stderr"
else passed=$((passed + 1)); fi
expect odd-loop 2 $tb sweep netlists/ota_gain_of_2.net --loop "G$esc[2J"
has odd-loop err "no .loop at 'G\x1B[2J'"

# 15. a resistive loop of three unknowns has no poles, and says so, never "more unknowns than
# the pole limit"
printf 'resistive loop\nV1 in 0 AC 1\nR1 in a 1k\nR2 a out 1k\nE1 out 0 0 a 100\n.loop E1\n.io V1 v(out)\n.ac dec 10 1 1k\n.end\n' \
    >"$tmp/resistive.net"
expect resistive 0 $tb "$tmp/resistive.net"
has resistive out "closed-loop poles: 0 finite, 0 in the right half-plane"
has resistive out "no finite closed-loop poles: the output follows the input at once, there is no time scale"
if grep -q "pole limit" "$tmp/out"; then failed=$((failed + 1)); echo "FAIL resistive: 'pole limit'"
else passed=$((passed + 1)); fi

# a lossless resonance exactly on a grid frequency (T infinite there; tests/stab/tank_on_grid_*.net,
# closed forms in tests/test_resonance.c): the infinite point is said, both crossings found, one
# phase-margin convention in every section, the sweep table's note column explains the empty row
for g in dec dec_fine lin lin_fine; do
    f=tests/stab/tank_on_grid_$g.net
    expect "tank-$g" 0 $tb "$f"
    has "tank-$g" out "T is infinite at 1 sweep point, the first at 1 kHz"
    has "tank-$g" out "phase margin                   -90.00 deg"
    has "tank-$g" out "|T| = 1 (falling) at 1.0031 kHz     phase   -90.000 deg   PM   90.000 deg"
    if grep -q "never crosses 1" "$tmp/out"; then failed=$((failed + 1)); echo "FAIL tank-$g: 'never crosses 1'"
    else passed=$((passed + 1)); fi
    expect "tank-$g-grid" 0 $tb "$f" --no-stability
    has "tank-$g-grid" out "phase margin                   90.00 deg"
    expect "tank-$g-csv" 0 $tb sweep "$f"
    has "tank-$g-csv" out "1000,,,"
    has "tank-$g-csv" out ",T infinite here (a pole of T on the axis): no T or a or A0"
    if grep -qiE '(^|[^a-z_])(nan|inf|infinity)([^a-z_]|$)' "$tmp/out"; then
        failed=$((failed + 1)); echo "FAIL tank-$g-csv: nan or inf"; else passed=$((passed + 1)); fi
done

# --at: the figures at chosen frequencies in text and JSON (their values: tests/ref/at_check.py)
expect at-text 0 $tb report tests/fb/noninverting_x20.net --at 1k,20kHz --no-stability
has at-text out "at chosen frequencies (each by a fresh solve there)"
has at-text out "    at 20 kHz"
has at-text out "Z at port out"
expect at-json 0 $tb report tests/fb/noninverting_x20.net --at 1k --at 0,3.3meg --json --no-stability
if /usr/bin/python3 - "$tmp/out" <<'PY'; then passed=$((passed + 1)); else failed=$((failed + 1)); echo "FAIL at-json: content"; fi
import json, sys
d = json.load(open(sys.argv[1]))
assert [e["hz"] for e in d["at"]] == [1000.0, 0.0, 3.3e6], d["at"]
lp = d["at"][0]["loops"][0]
assert lp["loop"] == "EA" and lp["solved"] and lp["breakdown"]["loading"] is not None
assert [p["name"] for p in lp["ports"]] == ["in", "out"]
PY
expect at-bad 2 $tb report tests/fb/noninverting_x20.net --at 1k,-5
has at-bad err "tbeta: --at needs frequencies of 0 Hz or more such as 1k,20k (at most 1000), got 1k,-5"
expect at-empty 2 $tb report tests/fb/noninverting_x20.net --at 1k,,2k
expect at-word 2 $tb report tests/fb/noninverting_x20.net --at one
expect at-html 0 $tb report tests/fb/noninverting_x20.net --at 1k --html -
has at-html out "<h3>At chosen frequencies (each by a fresh solve there)</h3>"
has at-html out "<!DOCTYPE html>"

# - for the netlist (standard input) and for stdout; --output replaces a file whole
expect stdin-sweep 0 sh -c "$tb sweep - <netlists/ota_gain_of_2.net"
mv "$tmp/out" "$tmp/stdin.csv"
expect file-sweep 0 $tb sweep netlists/ota_gain_of_2.net
if cmp -s "$tmp/out" "$tmp/stdin.csv"; then passed=$((passed + 1)); else failed=$((failed + 1)); echo "FAIL stdin-sweep: differs from the file's table"; fi
expect stdin-bad 2 sh -c "printf 'title\nR1 a 0 1k\nQ9 x\n' | $tb report -"
has stdin-bad err "<stdin>:3:1: error:"
echo "old" >"$tmp/report.txt"
expect output-report 0 $tb report netlists/ota_gain_of_2.net --output "$tmp/report.txt"
if [ ! -s "$tmp/out" ] && grep -q "feedback report for netlists/ota_gain_of_2.net" "$tmp/report.txt"; then
    passed=$((passed + 1)); else failed=$((failed + 1)); echo "FAIL output-report: stdout not empty or file not written"; fi
expect output-step 0 $tb step netlists/ota_gain_of_2.net --output "$tmp/step.csv"
head -1 "$tmp/step.csv" | grep -q "^t_s,y" && passed=$((passed + 1)) || { failed=$((failed + 1)); echo "FAIL output-step: no table"; }
expect output-dash 0 $tb sweep netlists/ota_gain_of_2.net --output -
has output-dash out "freq_hz,"
expect output-nodir 2 $tb report netlists/ota_gain_of_2.net --output "$tmp/no/such/dir/r.txt"
has output-nodir err "cannot write '$tmp/no/such/dir/r.txt'"
ls "$tmp"/no 2>/dev/null && { failed=$((failed + 1)); echo "FAIL output-nodir: something was made"; } || passed=$((passed + 1))
expect output-missing 2 $tb report netlists/ota_gain_of_2.net --output
has output-missing err "--output needs a file name"

# tbeta check --html: the summary page (well-formed, no script, nothing fetched) and the
# netlists' own pages beside it, linked from it
expect check-html 0 $tb check netlists --html "$tmp/lib.html" --html-reports --jobs 2
xmllint --noout "$tmp/lib.html" && passed=$((passed + 1)) || { failed=$((failed + 1)); echo "FAIL check-html: not well-formed"; }
has check-html out "check: "
if grep -q "<script" "$tmp/lib.html" || grep -Eq '(src|href)="(https?:)?//' "$tmp/lib.html"; then
    failed=$((failed + 1)); echo "FAIL check-html: a script or a fetched resource"; else passed=$((passed + 1)); fi
n=$(find netlists -name "*.net" | wc -l) # the library is searched recursively (netlists/devices/ too)
links=$(grep -o 'href="lib-reports/[^"]*"' "$tmp/lib.html" | wc -l)
pages=$(ls "$tmp/lib-reports"/*.html | wc -l)
if [ "$links" -eq "$n" ] && [ "$pages" -eq "$n" ]; then passed=$((passed + 1)); else
    failed=$((failed + 1)); echo "FAIL check-html: $links links, $pages pages for $n netlists"; fi
for page in $(grep -o 'href="lib-reports/[^"]*"' "$tmp/lib.html" | sed 's/href="//; s/"$//'); do
    [ -f "$tmp/$page" ] || { failed=$((failed + 1)); echo "FAIL check-html: link to a missing $page"; }
done
expect check-html-stdout 1 $tb check tests/check/regressed --html -
has check-html-stdout out '<span class="status fail">FAIL</span>'
if grep -q "^check: " "$tmp/out"; then failed=$((failed + 1)); echo "FAIL check-html-stdout: the text summary too"; else passed=$((passed + 1)); fi
expect check-reports-alone 2 $tb check netlists --html-reports
has check-reports-alone err "--html-reports needs --html FILE"
expect check-two-stdout 2 $tb check netlists --json - --html -
has check-two-stdout err "only one document can go to stdout"
expect check-output 0 $tb check netlists --output "$tmp/check.txt"
grep -q "^check: " "$tmp/check.txt" && [ ! -s "$tmp/out" ] && passed=$((passed + 1)) || { failed=$((failed + 1)); echo "FAIL check-output"; }

# the progress line: never in a pipe, never with CI set (even on a terminal)
expect progress-pipe 0 $tb sweep netlists/ota_gain_of_2.net
if grep -q "sweep points" "$tmp/err"; then failed=$((failed + 1)); echo "FAIL progress-pipe: a progress line in a pipe"; else passed=$((passed + 1)); fi
if command -v script >/dev/null 2>&1; then
    CI=1 script -qec "$tb check netlists --output /dev/null" /dev/null >"$tmp/tty.txt" 2>&1
    if grep -q "netlists (" "$tmp/tty.txt"; then failed=$((failed + 1)); echo "FAIL progress-ci: a progress line with CI set"; else passed=$((passed + 1)); fi
fi
# tbeta spread: scans, corners and Monte Carlo (docs/spread.md): exit codes, valid JSON and CSV,
# the same bytes for any --jobs, usage errors
sp=docs/examples/spread_buffer.net
expect spread-scan 0 $tb spread "$sp" --scan
has spread-scan out "scan: 9 runs over 1 axis"
has spread-scan out "caution: tbeta is a small-signal, linear analysis"
expect spread-corners 1 $tb spread "$sp" --corners --json
if /usr/bin/python3 -c 'import json,sys; d=json.load(open(sys.argv[1])); assert d["kind"] == "corners" and len(d["runs"]) == 257' "$tmp/out"; then
    passed=$((passed + 1)); else failed=$((failed + 1)); echo "FAIL spread-corners: JSON"; fi
cat "$tmp/out" >>"$tmp/all"
expect spread-mc1 1 $tb spread "$sp" --samples 40 --seed 5 --csv --jobs 1
cp "$tmp/out" "$tmp/mc1"
expect spread-mc3 1 $tb spread "$sp" --samples 40 --seed 5 --csv --jobs 3
if cmp -s "$tmp/mc1" "$tmp/out"; then passed=$((passed + 1)); else failed=$((failed + 1)); echo "FAIL spread: CSV differs across --jobs"; fi
cat "$tmp/out" >>"$tmp/all"
expect spread-html 0 $tb spread "$sp" --scan --html "$tmp/spread.html"
if grep -q "<svg" "$tmp/spread.html"; then passed=$((passed + 1)); else failed=$((failed + 1)); echo "FAIL spread-html: no plot"; fi
expect spread-html-mc 1 $tb spread "$sp" --samples 30 --html "$tmp/mc.html"
if grep -q "phase margin at G1 over 30 samples" "$tmp/mc.html" && /usr/bin/python3 -c 'import sys; open(sys.argv[1], encoding="utf-8").read()' "$tmp/mc.html"; then
    passed=$((passed + 1)); else failed=$((failed + 1)); echo "FAIL spread-html-mc: no histogram, or not UTF-8"; fi
expect spread-gain 0 $tb spread docs/examples/spread_gain.net --samples 50
has spread-gain out "desensitivity: the loop source's gain spreads"
cat "$tmp/out" >>"$tmp/all"
expect spread-no-cards 2 $tb spread netlists/ota_gain_of_2.net
has spread-no-cards err "the netlist has no .scan or .spread card"
expect spread-two-modes 2 $tb spread "$sp" --json
has spread-two-modes err "--csv, --json and --html take one mode"
expect spread-samples 2 $tb spread "$sp" --samples 0
has spread-samples err "--samples takes a whole number from 1 to 100000, not '0'"
expect spread-seed 2 $tb spread "$sp" --samples 5 --seed 9007199254740992
has spread-seed err "--seed takes a whole number from 0 to 9007199254740991, not '9007199254740992'"
expect spread-sens 0 $tb spread "$sp" --sens-at 1.4meg --sens-at 0
has spread-sens out "at 1.4MHz |T| is set by G2 (+1 %/%), E1 (+1 %/%) and G1 (+1 %/%);"
has spread-sens out "its phase by R2 (-0.179 deg/%), C2 (-0.179 deg/%) and CL (-0.12 deg/%)"
has spread-sens out "at DC |T| is set by G2 (+1 %/%), R2 (+1 %/%) and E1 (+1 %/%); no element moves its phase"
cat "$tmp/out" >>"$tmp/all"
expect spread-sens-bad 2 $tb spread "$sp" --sens-at -1
has spread-sens-bad err "--sens-at takes a frequency from 0 (DC) to 1e15 Hz (1k, 2.5meg), not '-1'"
expect spread-sens-mode 2 $tb spread "$sp" --sens-at 1k --json
expect spread-bad 2 $tb spread tests/bad/spread_no_dist.net
has spread-bad err "spread_no_dist.net:12:14: error: expected 'flat', 'gauss' or 'pick' on .spread"
# tbeta check runs the spread for the corners.* and samples.* figures of .expect
expect spread-check 0 $tb check "$sp"
has spread-check out "pass   $sp (4 expectations)"
sed 's/corners.phase_margin_deg >= 20/corners.phase_margin_deg >= 25/' "$sp" >"$tmp/spread_fail.net"
expect spread-check-fail 1 $tb check "$tmp/spread_fail.net"
has spread-check-fail out "G1.corners.phase_margin_deg is 21.4313 deg, expected >= 25 deg"
# tbeta report carries the spread part of a netlist with .scan and .spread cards (docs/spread.md);
# the numbers themselves are checked by tests/ref/spread_report_check.py
expect report-spread 0 $tb report "$sp" --samples 30 --seed 3 --sens-at 1.4meg,0
has report-spread out "spread over the netlist's .scan and .spread cards"
has report-spread out "scan: 9 runs over 1 axis"
has report-spread out "corners: 8 independent dimensions at their extremes, 257 runs"
has report-spread out "  PM deg     57.06        21.431 (252)           79.04 (5)              lowest"
has report-spread out "Monte Carlo: 30 samples, seed 3, 8 independent draws"
has report-spread out "sensitivities at 1.4MHz (adjoint; per 1 % increase of each element or parameter)"
has report-spread out "at 1.4MHz |T| is set by G2 (+1 %/%), E1 (+1 %/%) and G1 (+1 %/%);"
has report-spread out "at DC |T| is set by G2 (+1 %/%), R2 (+1 %/%) and E1 (+1 %/%); no element moves its phase"
cat "$tmp/out" >>"$tmp/all"
expect report-spread-default 0 $tb "$sp"
has report-spread-default out "Monte Carlo: 100 samples, seed 1, 8 independent draws"
expect report-spread-json 0 $tb report "$sp" --json --samples 20 --sens-at 1meg
if /usr/bin/python3 -c 'import json,sys; d=json.load(open(sys.argv[1])); s=d["spread"]
assert set(s) == {"scan", "corners", "monte_carlo"} and s["monte_carlo"]["samples"] == 20
assert s["monte_carlo"]["seed"] == 1 and d["sensitivities_at"][0]["loops"]["G1"]["T_mag_set_by"]' "$tmp/out"; then
    passed=$((passed + 1)); else failed=$((failed + 1)); echo "FAIL report-spread-json: no spread part"; fi
cat "$tmp/out" >>"$tmp/all"
expect report-no-mc 0 $tb report "$sp" --samples 0
if grep -q "Monte Carlo" "$tmp/out"; then failed=$((failed + 1)); echo "FAIL report-no-mc: a Monte Carlo ran"
else passed=$((passed + 1)); fi
expect report-no-spread 0 $tb report "$sp" --no-spread
has report-no-spread out "spread: the netlist's .scan and .spread cards were not run (--no-spread;"
expect report-spread-html 0 $tb report "$sp" --samples 20 --sensitivities --sens-at 1meg --html "$tmp/sp.html"
if grep -q "<h2>Spread: the loop over load and tolerance</h2>" "$tmp/sp.html" && grep -q "<h2>Which part sets the loop</h2>" "$tmp/sp.html" \
    && [ "$(grep -c "<svg" "$tmp/sp.html")" -ge 5 ] && xmllint --noout "$tmp/sp.html"; then
    passed=$((passed + 1)); else failed=$((failed + 1)); echo "FAIL report-spread-html: no spread sections or pictures"; fi
expect report-samples-bad 2 $tb report "$sp" --samples 100001
has report-samples-bad err "--samples needs a whole number from 0 to 100000, got 100001"
expect report-seed-bad 2 $tb report "$sp" --seed 9007199254740992
has report-seed-bad err "--seed needs a whole number from 0 to 9007199254740991, got 9007199254740992"
expect report-sens-bad 2 $tb report "$sp" --sens-at 1k,x
has report-sens-bad err "--sens-at needs frequencies from 0 (DC) to 1e15 Hz such as 1k,2.5meg (at most 8), got 1k,x"
expect report-sens-many 2 $tb report "$sp" --sens-at 1,2,3,4,5 --sens-at 6,7,8,9
expect report-samples-no-card 0 $tb report netlists/ota_gain_of_2.net --samples 50
has report-samples-no-card err "ota_gain_of_2.net has no .spread card: --samples and --seed have nothing to draw"
expect report-samples-missing 2 $tb report "$sp" --samples
has report-samples-missing err "--samples needs a value"
if grep -qiE '(^|[^a-z_])(nan|inf|infinity)([^a-z_]|$)' "$tmp/all"; then failed=$((failed + 1)); echo "FAIL spread: nan or inf in an output"
else passed=$((passed + 1)); fi

# a loop broken inside a device card names the device's part, not the stamp (docs/devices.md)
expect device-role-mos 0 $tb netlists/devices/cmos_twostage_follower.net
has device-role-mos out "loop at M6 (gm of a MOS transistor, gain 0.002)"
expect device-role-bjt 0 $tb netlists/devices/shunt_feedback_pair.net
has device-role-bjt out "loop at Q1 (gm of a bipolar transistor, gain"
cat > "$tmp/gmb.net" <<'NET'
Body transconductance as the loop
V1 in 0 AC 1
M1 d in 0 b gm=1m gds=10u chi=0.2 cgs=1p cgd=0.1p
R1 d 0 10k
R2 b 0 1k
RL d in 100k
.io V1 v(d)
.loop M1.gmb
.ac dec 5 1 1g
.end
NET
expect device-role-gmb 0 $tb "$tmp/gmb.net"
has device-role-gmb out "loop at M1.gmb (body transconductance gmb of a MOS transistor, gain 0.0002)"
expect device-role-g 0 $tb netlists/devices/opamp_bjt_buffer.net
has device-role-g out "loop at XU1.Ga (voltage-controlled current source, gain 0.001)"

echo "cli: $passed passed, $failed failed"
[ "$failed" -eq 0 ]
