#!/usr/bin/env bash
# Reproduces the `heatbound analyze` budgets of DESIGN.md §6:
#   - peak memory flat in file length (10 thousand vs 10 million rows);
#   - replay time <= 2x plain CSV parsing of the same file
#     (host-tools/examples/csv_parse_baseline.rs);
#   - the same with a [csv] table, on another logger's layout (10 thousand
#     and 2 million rows): a preamble, semicolons, decimal commas, kW, and the
#     hot side as raw type K millivolts with a cold-junction column, against
#     the plain parse of that same file.
# Run from the repository root. Writes the CSV files to ${BENCH_DIR:-/tmp}.
# Row counts: BENCH_ROWS (default "10000 10000000") for the default layout,
# BENCH_MAPPED_ROWS (default "10000 2000000") for the [csv] layout.
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

for rows in ${BENCH_ROWS:-10000 10000000}; do
    file="$dir/heatbound-bench-$rows.csv"
    [ -s "$file" ] || make_csv "$rows" "$file"
    printf '\n== %s rows, %s bytes\n' "$rows" "$(stat -c %s "$file")"
    /usr/bin/time -f 'analyze:  peak RSS %M KiB, wall %e s, user %U s' "$bin" analyze "$file" --json > /dev/null
    /usr/bin/time -f 'baseline: peak RSS %M KiB, wall %e s, user %U s' "$baseline" "$file" > /dev/null
done

# Another logger's file: three preamble lines, semicolons, decimal commas,
# heater power in kW, the hot side as type K millivolts (about 41 uV/K from a
# 23 degC cold junction) with the junction in its own column.
make_mapped_csv() { # rows file
    awk -v n="$1" 'BEGIN {
        print "Logger HB-7 export"; print "Start: 2024-06-11 08:00"; print "";
        print "Zeit;TC1 Kopf;CJ;PT100 Kuehler;P_Heizer;P_Welle;Q_Kuehl";
        for (i = 0; i < n; i++) {
            printf "%.1f;%.4f;%.1f;%.3f;%.5f;%.2f;%.2f\n", i, (550 + 5 * sin(i / 300) - 23) * 0.04155, 23,
                25 + cos(i / 700), (400 + 2 * sin(i / 50)) / 1000, 40 + 0.5 * cos(i / 90), 310 + 3 * sin(i / 200);
        }
    }' | sed '5,$ y/./,/' > "$2"
}
rig="$dir/heatbound-bench-mapped.toml"
cat > "$rig" <<'TOML'
[csv]
delimiter = ";"
decimal = ","
skip_lines = 3
time = { column = "Zeit", unit = "s" }
hot = { column = "TC1 Kopf", unit = "mV", sensor = "type-k", cold_junction = { column = "CJ", unit = "degC" } }
cold = { column = "PT100 Kuehler", unit = "degC" }
heat_in = { column = "P_Heizer", unit = "kW" }
work = { column = "P_Welle", unit = "W" }
heat_out = { column = "Q_Kuehl", unit = "W" }
TOML
for rows in ${BENCH_MAPPED_ROWS:-10000 2000000}; do
    file="$dir/heatbound-bench-mapped-$rows.csv"
    [ -s "$file" ] || make_mapped_csv "$rows" "$file"
    printf '\n== [csv] layout, %s rows, %s bytes\n' "$rows" "$(stat -c %s "$file")"
    /usr/bin/time -f 'analyze:  peak RSS %M KiB, wall %e s, user %U s' \
        "$bin" analyze "$file" --config "$rig" --json > /dev/null
    /usr/bin/time -f 'baseline: peak RSS %M KiB, wall %e s, user %U s' \
        "$baseline" "$file" --delimiter ';' --decimal , --skip-lines 3 > /dev/null
done
