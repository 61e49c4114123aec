#!/bin/sh
# Instructions of one explicit step against one step of the hand-written loop (the comparison of
# the report's "Explicit step" section, independent of the machine's load), counted by
# valgrind's callgrind on `bench-report --explicit-steps`. Each figure is the difference of two
# runs with different step counts, divided by the difference: the set-up (model, integrator,
# hand loop; the same in both) cancels. One thread (RAYON_NUM_THREADS=1), so both loops run
# serially at every size (in the report, n >= 32768 runs on rayon's pool).
#
# Usage (from the repository root):  sh bench-report/explicit-instructions.sh [N ...]
# Default sizes: 1000 100000. Needs valgrind; the report itself does not.
set -eu
cd "$(dirname "$0")"
cargo build --release --quiet
bin=target/release/stepgauge-bench-report
s1=${S1:-20}
s2=${S2:-120}
sizes=${*:-1000 100000}
count() {
    RAYON_NUM_THREADS=1 valgrind --tool=callgrind --callgrind-out-file=/dev/null \
        "$bin" --explicit-steps "$1" "$2" "$3" "$4" 2>&1 |
        sed -n 's/.*Collected : *\([0-9]*\).*/\1/p'
}
printf '%-6s %-8s %14s %14s %8s\n' model n step hand step/hand
for model in chain cube; do
    for n in $sizes; do
        for w in step hand; do
            a=$(count "$w" "$model" "$n" "$s1")
            b=$(count "$w" "$model" "$n" "$s2")
            eval "i_$w=\$(( (b - a) / (s2 - s1) ))"
        done
        ratio=$(awk "BEGIN { printf \"%.4f\", $i_step / $i_hand }")
        printf '%-6s %-8s %14s %14s %8s\n' "$model" "$n" "$i_step" "$i_hand" "$ratio"
    done
done
