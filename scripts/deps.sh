#!/bin/sh
# scripts/deps.sh: installs the Debian packages tbeta's build and tests need, when missing.
# Usage: sh scripts/deps.sh [extra-package...]
set -u
pkgs="libsuitesparse-dev libcmocka-dev liblapack-dev libopenblas-dev libjansson-dev python3-numpy python3-scipy libxml2-utils pkgconf groff-base chromium fonts-dejavu-core $*"
missing=""
for p in $pkgs; do
    if ! dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q "install ok installed"; then
        missing="$missing $p"
    fi
done
[ -z "$missing" ] && exit 0
echo "tbeta: missing Debian packages:$missing"
if [ "$(id -u)" != 0 ]; then
    echo "tbeta: run as root:  apt-get update && apt-get install -y$missing"
    exit 1
fi
export DEBIAN_FRONTEND=noninteractive
apt-get update -q && apt-get install -y -q $missing || {
    echo "tbeta: installing failed; run:  apt-get update && apt-get install -y$missing"
    exit 1
}
