#!/bin/sh
# tests/browser.sh: the HTML review page and the SVG pictures as a reader gets them. For every
# demo netlist and spread demo (whose pages carry the spread part): `tbeta report NET --html` and
# `tbeta plot NET --svg DIR`; every SVG and every page must be well-formed XML (xmllint); each
# page is rendered by headless Chromium to a PNG,
# which must have the expected width and be far from blank (tests/png_check.py), with no
# console error. The same for the library summary page of `tbeta check --html --html-reports`.
# Usage: sh tests/browser.sh BUILD [WRAPPER]
build=$1
tbeta=$build/tbeta
case "$build" in
*asan* | *valgrind*) echo "browser: skipped in the $build build (the pages are the same; the default build renders them)"; exit 0 ;;
esac
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
fail=0
pages=0
say() { echo "browser: FAIL $*"; fail=1; }
browser=$(command -v chromium || command -v chromium-browser)
[ -n "$browser" ] || { echo "browser: FAIL no chromium (scripts/deps.sh installs it)"; exit 1; }
for net in netlists/*.net tests/fb/*.net docs/examples/spread_*.net; do
    base=$(basename "$net" .net)
    "$tbeta" report "$net" --html "$tmp/$base.html" >/dev/null 2>&1
    rc=$?
    [ "$rc" -le 1 ] || { say "$net: report --html exit $rc"; continue; }
    xmllint --noout "$tmp/$base.html" 2>"$tmp/xml.txt" || { say "$net: the page is not well-formed"; cat "$tmp/xml.txt"; }
    grep -q "<script" "$tmp/$base.html" && say "$net: the page has a script"
    grep -Eq "(src|href)=\"(https?:)?//" "$tmp/$base.html" && say "$net: the page fetches something"
    mkdir -p "$tmp/$base"
    "$tbeta" plot "$net" --svg "$tmp/$base" >/dev/null 2>&1 || say "$net: plot exit $?"
    for svg in "$tmp/$base"/*.svg; do
        [ -f "$svg" ] || { say "$net: no picture written"; continue; }
        xmllint --noout "$svg" 2>/dev/null || say "$svg: not well-formed"
    done
    timeout 120 "$browser" --headless --no-sandbox --disable-gpu --hide-scrollbars --window-size=1000,1400 \
        --enable-logging=stderr --v=0 --screenshot="$tmp/$base.png" "file://$tmp/$base.html" \
        >"$tmp/chrome.txt" 2>&1 || true
    grep -q "CONSOLE" "$tmp/chrome.txt" && { say "$net: console messages"; grep CONSOLE "$tmp/chrome.txt" | head -3; }
    /usr/bin/python3 tests/png_check.py "$tmp/$base.png" 1000 1400 || say "$net: the rendered page"
    pages=$((pages + 1))
done
# the library summary of tbeta check, with the netlists' own pages beside it
"$tbeta" check netlists tests/fb --html "$tmp/library.html" --html-reports >/dev/null 2>&1
rc=$?
[ "$rc" -le 1 ] || say "check --html exit $rc"
xmllint --noout "$tmp/library.html" 2>"$tmp/xml.txt" || { say "the summary page is not well-formed"; cat "$tmp/xml.txt"; }
grep -q "<script" "$tmp/library.html" && say "the summary page has a script"
grep -Eq "(src|href)=\"(https?:)?//" "$tmp/library.html" && say "the summary page fetches something"
for page in "$tmp"/library-reports/*.html; do
    xmllint --noout "$page" 2>/dev/null || say "$page: not well-formed"
done
timeout 120 "$browser" --headless --no-sandbox --disable-gpu --hide-scrollbars --window-size=1000,1400 \
    --enable-logging=stderr --v=0 --screenshot="$tmp/library.png" "file://$tmp/library.html" >"$tmp/chrome.txt" 2>&1 || true
grep -q "CONSOLE" "$tmp/chrome.txt" && { say "summary page: console messages"; grep CONSOLE "$tmp/chrome.txt" | head -3; }
/usr/bin/python3 tests/png_check.py "$tmp/library.png" 1000 1400 || say "the rendered summary page"
pages=$((pages + 1))
[ "$fail" -eq 0 ] && echo "browser: $pages pages rendered, every page and picture well-formed"
exit $fail
