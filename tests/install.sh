#!/bin/sh
# tests/install.sh: installs tbeta into a scratch prefix (make install PREFIX=...), builds the
# example program of docs/api.md against the installed copy through pkg-config, runs it on
# a demo netlist and compares what it prints with the installed program's JSON; checks the
# man page with groff -ww (no warnings).
# Usage: sh tests/install.sh BUILD [WRAPPER]
build=$1
wrap=${2:-}
case "$build" in
*asan*) echo "install: skipped in the sanitizer build (the example would need the same flags)"; exit 0 ;;
esac
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
fail=0
say() { echo "install: FAIL $*"; fail=1; }
make -s --no-print-directory BUILD="$build" PREFIX="$tmp/usr" install >"$tmp/make.log" 2>&1 || {
    cat "$tmp/make.log"; say "make install"; exit 1; }
for f in bin/tbeta lib/libtbeta.a lib/libtbeta.so lib/libtbeta.so.0 include/tbeta.h lib/pkgconfig/tbeta.pc \
    share/man/man1/tbeta.1; do
    [ -e "$tmp/usr/$f" ] || say "missing $f"
done
export PKG_CONFIG_PATH="$tmp/usr/lib/pkgconfig"
[ "$(pkg-config --modversion tbeta)" = "$(sed -n 's/^#define TB_VERSION "\(.*\)"/\1/p' include/tbeta.h)" ] ||
    say "pkg-config version differs from TB_VERSION"
# shellcheck disable=SC2046
cc -std=c11 -Wall -Wextra -Werror docs/examples/api_example.c $(pkg-config --cflags --libs tbeta) \
    -o "$tmp/api_example" || say "the example does not build through pkg-config"
net=netlists/twostage_follower_pm_52.net
LD_LIBRARY_PATH="$tmp/usr/lib" $wrap "$tmp/api_example" "$net" >"$tmp/example.txt"
rc=$?
[ "$rc" -eq 0 ] || say "the example exits $rc on $net"
LD_LIBRARY_PATH="$tmp/usr/lib" ldd "$tmp/api_example" | grep -q "$tmp/usr/lib/libtbeta.so.0" || say "the example is not linked to the installed library"
"$tmp/usr/bin/tbeta" report "$net" --json >"$tmp/report.json" || say "the installed program fails on $net"
/usr/bin/python3 - "$tmp/example.txt" "$tmp/report.json" <<'PY' || fail=1
import json, sys
text = open(sys.argv[1]).read().split()
loop = json.load(open(sys.argv[2]))["loops"][0]
got = {text[i]: text[i + 1] for i in range(len(text) - 1) if text[i] in ("PM", "verdict")}
ok = abs(float(got["PM"]) - loop["phase_margin_deg"]) < 5e-4 and got["verdict"] == loop["verdict"]
if not ok:
    print("install: FAIL the example prints %r, the program's JSON PM %r verdict %r"
          % (got, loop["phase_margin_deg"], loop["verdict"]))
sys.exit(0 if ok else 1)
PY
warnings=$(groff -ww -man -Tutf8 docs/tbeta.1 2>&1 >/dev/null)
[ -z "$warnings" ] || say "groff -ww warns on docs/tbeta.1: $warnings"
[ "$fail" -eq 0 ] && echo "install: make install, pkg-config build of docs/examples/api_example.c, man page: ok"
exit $fail
