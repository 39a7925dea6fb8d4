#!/bin/sh
# make bench: speed and memory of a whole job on generated data (invented
# house sales), a benchmark and not a test. ROWS (default 1000000) sets the
# size. Prints each stage's rows/s as rowfit reports it, the wall time and
# the peak memory (GNU time's maximum resident set size).
set -eu
ROWS=${ROWS:-1000000}
BUILD=${BUILD:-build}
dir=$(mktemp -d /tmp/rowfit-bench.XXXXXX)
trap 'rm -rf "$dir"' EXIT
make --no-print-directory -s rowfit "$BUILD/gen-houses"
"$BUILD/gen-houses" --rows "$ROWS" --listings 1000 --out "$dir"
cp workbooks/house-prices.job "$dir/"
echo "bench: $ROWS sales + 1000 listings, $(du -h "$dir/house-sales.csv" | cut -f1) of CSV"
# script(1) gives rowfit a terminal, so it prints its per-stage progress.
if command -v /usr/bin/time >/dev/null 2>&1; then
    timer="/usr/bin/time -f bench:%e_s_wall_%M_kB_peak"
else
    timer=""
fi
script -qec "$timer ./rowfit --force $dir/house-prices.job" /dev/null | tr -d '\r' |
    sed 's/_/ /g'
