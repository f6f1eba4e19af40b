#!/usr/bin/env bash
# Reproduces the `heatbound audit` memory goal: peak memory flat in the
# log's length, at most 32 MB for a ten-day log at one summary a second
# (864,000 summaries), against one day (86,400).
# Run from the repository root. Writes the captures and logs to
# ${BENCH_DIR:-/tmp}. Needs GNU time at /usr/bin/time (Debian: apt-get
# install -y time).
set -euo pipefail
cd "$(dirname "$0")/../.."

target="${CARGO_TARGET_DIR:-target}"
dir="${BENCH_DIR:-/tmp}"
cargo build --release -p heatbound-host --bin heatbound
bin="$target/release/heatbound"

for seconds in 86400 864000; do
    cap="$dir/heatbound-audit-bench-$seconds.bin"
    db="$dir/heatbound-audit-bench-$seconds.sqlite"
    if [ ! -s "$db" ]; then
        # A 1 Hz sample rate keeps the simulation short; one summary a second.
        "$bin" simulate --scenario steady --rate-hz 1 --duration-s "$seconds" --out "$cap" 2> /dev/null
        rm -f "$db"
        "$bin" watch --quiet --input "$cap" --db "$db" > /dev/null
    fi
    summaries=$(python3 -c "import sqlite3,sys; print(sqlite3.connect(sys.argv[1]).execute('SELECT count(*) FROM summaries').fetchone()[0])" "$db")
    printf '\n== %s s of rig time, %s summaries, log %s bytes\n' "$seconds" "$summaries" "$(stat -c %s "$db")"
    # The verdict is printed too: a memory figure of an audit that failed early means nothing.
    /usr/bin/time -f "audit: peak RSS %M KiB, wall %e s, user %U s" "$bin" audit "$db" | tail -n 1 || true
done
