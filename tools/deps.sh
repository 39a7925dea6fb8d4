#!/bin/sh
# Installs the Debian packages named as arguments that are not installed yet.
# As root it runs apt-get; otherwise it prints the command to run.
missing=""
for p in "$@"; do
    dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q "install ok installed" \
        || missing="$missing $p"
done
[ -z "$missing" ] && exit 0
if [ "$(id -u)" = 0 ]; then
    echo "rowfit: installing missing packages:$missing"
    export DEBIAN_FRONTEND=noninteractive
    apt-get update -qq && apt-get install -y -qq --no-install-recommends $missing >/dev/null \
        || { echo "rowfit: apt-get failed for:$missing" >&2; exit 1; }
else
    echo "rowfit: these Debian packages are missing:$missing" >&2
    echo "rowfit: install them with: sudo apt-get install$missing" >&2
    exit 1
fi
