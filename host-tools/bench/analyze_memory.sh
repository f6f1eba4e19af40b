#!/usr/bin/env bash
# Reproduces the `heatbound analyze` budgets of DESIGN.md §6:
#   - peak memory flat in file length (10 thousand vs 10 million rows);
#   - replay time <= 2x plain CSV parsing of the same file
#     (host-tools/examples/csv_parse_baseline.rs).
# Run from the repository root. Writes the CSV files to ${BENCH_DIR:-/tmp}.
# Needs GNU time at /usr/bin/time (Debian: apt-get install -y time).
set -euo pipefail
cd "$(dirname "$0")/../.."

target="${CARGO_TARGET_DIR:-target}"
dir="${BENCH_DIR:-/tmp}"
cargo build --release -p heatbound-host --bin heatbound --example csv_parse_baseline
bin="$target/release/heatbound"
baseline="$target/release/examples/csv_parse_baseline"

# A 1 Hz engine run: smooth, varying channels with measured heat out.
make_csv() { # rows file
    awk -v n="$1" 'BEGIN {
        print "time_s,hot_c,cold_c,heat_in_w,work_w,heat_out_w";
        for (i = 0; i < n; i++) {
            printf "%d,%.2f,%.3f,%.2f,%.2f,%.2f\n", i, 550 + 5 * sin(i / 300), 25 + cos(i / 700),
                400 + 2 * sin(i / 50), 40 + 0.5 * cos(i / 90), 310 + 3 * sin(i / 200);
        }
    }' > "$2"
}

for rows in 10000 10000000; do
    file="$dir/heatbound-bench-$rows.csv"
    [ -s "$file" ] || make_csv "$rows" "$file"
    printf '\n== %s rows, %s bytes\n' "$rows" "$(stat -c %s "$file")"
    /usr/bin/time -f 'analyze:  peak RSS %M KiB, wall %e s, user %U s' "$bin" analyze "$file" --json > /dev/null
    /usr/bin/time -f 'baseline: peak RSS %M KiB, wall %e s, user %U s' "$baseline" "$file" > /dev/null
done
