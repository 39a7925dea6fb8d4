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
# script(1) gives rowfit a terminal, so it prints its per-stage progress;
# GNU time (package time) adds the wall time and the peak memory.
cat > "$dir/run.sh" <<EOT
#!/bin/sh
if [ -x /usr/bin/time ]; then
    exec /usr/bin/time -f "bench: %e s wall, %M kB peak memory" "$PWD/rowfit" --force "$dir/house-prices.job"
fi
exec "$PWD/rowfit" --force "$dir/house-prices.job"
EOT
chmod +x "$dir/run.sh"
script -qec "$dir/run.sh" /dev/null | tr -d '\r'

# The yes/no demo at the same size (invented applicants): the logistic fit
# by Newton's method, then the same again by solver gradient.
make --no-print-directory -s "$BUILD/gen-applicants"
"$BUILD/gen-applicants" --rows "$ROWS" --new 1000 --out "$dir"
cp workbooks/applicants.job "$dir/"
sed 's/^model logistic/model logistic\nsolver gradient/' workbooks/applicants.job > "$dir/applicants-gradient.job"
echo "bench: $ROWS applicants + 1000 new, $(du -h "$dir/applicants.csv" | cut -f1) of CSV"
for job in applicants applicants-gradient; do
    cat > "$dir/run.sh" <<EOT
#!/bin/sh
if [ -x /usr/bin/time ]; then
    exec /usr/bin/time -f "bench: $job: %e s wall, %M kB peak memory" "$PWD/rowfit" --force "$dir/$job.job"
fi
exec "$PWD/rowfit" --force "$dir/$job.job"
EOT
    script -qec "$dir/run.sh" /dev/null | tr -d '\r'
done
