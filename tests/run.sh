#!/bin/sh
# Runs every test suite: the cmocka unit tests given as arguments, then the
# end-to-end and reference suites in tests/e2e and tests/nist, which drive
# $ROWFIT and read its workbooks back with python3-openpyxl (Debian's, as a
# test oracle only). Prints one closing line: "N passed, M failed".
ROWFIT=${ROWFIT:-./rowfit}
PYTHON=${PYTHON:-/usr/bin/python3}   # Debian's python3, which has openpyxl
export ROWFIT PYTHON
out=${BUILD:-build}/test-logs
mkdir -p "$out"
passed=0; failed=0; bad_suites=""

count() {  # $1 suite name, $2 log, $3 exit code
    p=$(sed -n 's/^\[  PASSED  \] \([0-9]*\) test.*/\1/p; s/^\([0-9]*\) passed, [0-9]* failed.*/\1/p' "$2" | awk '{s+=$1} END {print s+0}')
    f=$(sed -n 's/^\[  FAILED  \] \([0-9]*\) test.*/\1/p; s/^[0-9]* passed, \([0-9]*\) failed.*/\1/p' "$2" | awk '{s+=$1} END {print s+0}')
    if [ "$3" -ne 0 ] && [ "$f" -eq 0 ]; then f=1; fi
    passed=$((passed + p)); failed=$((failed + f))
    if [ "$3" -ne 0 ]; then bad_suites="$bad_suites $1"; st=FAIL; else st=ok; fi
    printf '%-28s %4d passed %4d failed  %s\n' "$1" "$p" "$f" "$st"
}

for t in "$@"; do
    name=$(basename "$t")
    "$t" > "$out/$name.log" 2>&1; rc=$?
    count "$name" "$out/$name.log" $rc
done
for s in tests/nist/nist.py tests/nist/harder.py tests/e2e/test_e2e.py tests/e2e/test_logistic.py tests/e2e/test_validation.py tests/e2e/test_network.py tests/e2e/demo_truth.py tests/e2e/test_recalc.py tests/e2e/test_formats.py tests/e2e/test_peek.py; do
    [ -f "$s" ] || continue
    name=$(basename "$s" .py)
    "$PYTHON" "$s" > "$out/$name.log" 2>&1; rc=$?
    count "$name" "$out/$name.log" $rc
    [ "$name" = nist ] && grep -E "^NIST .* (set|minimum)" "$out/$name.log"
    [ "$name" = harder ] && grep -E "harder Filip" "$out/$name.log"
done
# The fuzz harnesses replay their committed seed corpora once each (a seed
# passes when the harness neither crashes nor trips a sanitizer).
for h in csv job formula xlsx ods xls; do
    bin=build-fuzz/fuzz_$h
    [ -x "$bin" ] || continue
    # the seeds, and any kept reproducer of a crash that is now guarded
    kept=$(ls -d tests/fuzz/crashes-$h/* 2>/dev/null)
    n=$(( $(ls tests/fuzz/corpus-$h | wc -l) + $(echo "$kept" | grep -c .) ))
    "$bin" tests/fuzz/corpus-$h/* $kept > "$out/fuzz-$h.log" 2>&1; rc=$?
    if [ $rc -eq 0 ]; then echo "$n passed, 0 failed" >> "$out/fuzz-$h.log"; fi
    count "fuzz-$h" "$out/fuzz-$h.log" $rc
done
if [ -n "$bad_suites" ]; then
    echo "failing suites:$bad_suites (logs in $out/)"
    for s in $bad_suites; do echo "--- $s"; grep -E "FAIL|ERROR|Error|error" "$out/$s.log" | head -20; done
fi
echo "$passed passed, $failed failed"
[ "$failed" -eq 0 ]
