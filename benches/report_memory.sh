#!/usr/bin/env bash
# Peak memory and time of `report` on per-sample logs of growing length, for
# docs/performance.md (issue 21: flat memory, at least 1 M rows/s). Each log is a demo soak
# at 1 k samples/s recorded with `--every 0`; the report runs as text, --json and with a
# PNG plot. Uses /usr/bin/time and python3.
# Usage: benches/report_memory.sh [HOURS ...]   (default: 1 4; 16 h makes a ~2 GB log)
# With BIN=path, that binary is measured and nothing is built.
set -euo pipefail
cd "$(dirname "$0")/.."
[ $# -gt 0 ] || set -- 1 4
if [ -z "${BIN:-}" ]; then
    cargo build --release -q
fi
bin=${BIN:-target/release/dbtrail}
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
# Wall seconds and peak RSS in KB of one run, its output thrown away.
secs() { /usr/bin/time -f "%e %M" "$@" 2>&1 >/dev/null | tail -1; }

echo "machine: $(nproc) cores, $(grep -m1 'model name' /proc/cpuinfo | cut -d: -f2 | xargs); $(date -u +%F)"
for hours in "$@"; do
    log="$work/soak-${hours}h.csv"
    "$bin" record --demo soak --duration "${hours}h" --fast --every 0 --out "$log" 2>/dev/null
    rows=$(grep -vc '^#' "$log")
    size_mb=$(python3 -c "import os; print(f'{os.path.getsize(\"$log\")/1e6:.0f}')")
    for mode in text json png; do
        case $mode in
            text) args=() ;;
            json) args=(--json) ;;
            png) args=(--plot "$work/p.png" --force) ;;
        esac
        read -r s kb < <(secs "$bin" report "$log" "${args[@]}")
        python3 -c "print(f'$hours h, $rows rows, $size_mb MB, $mode: {$s:.2f} s ({($rows-1)/max($s,1e-3)/1e6:.2f} M rows/s), peak RSS {$kb/1024:.1f} MB')"
    done
    rm -f "$log"
done
