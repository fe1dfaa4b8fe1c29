#!/usr/bin/env bash
# Runs every fuzz target in turn for SECONDS each (default 600), then merges each corpus
# down to the inputs that add coverage, at most 1 KiB each, so the committed copy stays
# small. Needs cargo-fuzz and a nightly toolchain (or
# RUSTC_BOOTSTRAP=1 on stable). Crashes land in fuzz/artifacts/TARGET/.
# Usage: fuzz/run.sh [SECONDS] [TARGET...]
set -uo pipefail
cd "$(dirname "$0")"
secs=${1:-600}
shift || true
targets=("$@")
[ ${#targets[@]} -eq 0 ] && targets=(decode_ascii decode_binary profile quantity log_reader)
toolchain=+nightly
rustup toolchain list | grep -q nightly || { toolchain=; export RUSTC_BOOTSTRAP=1; }
for t in "${targets[@]}"; do
    mkdir -p "corpus/$t"
    cargo $toolchain fuzz run -O "$t" "corpus/$t" -- -max_total_time="$secs" -max_len=8192 \
        -print_final_stats=1 > "logs/$t.log" 2>&1
    echo "$t: exit $?; $(grep -E 'stat::number_of_executed_units|stat::peak_rss_mb' "logs/$t.log" | tr '\n' ' ')"
    small=$(mktemp -d)
    cargo $toolchain fuzz run -O "$t" "$small" "corpus/$t" -- -merge=1 -max_len=1024 > /dev/null 2>&1 \
        && rm -rf "corpus/$t" && mv "$small" "corpus/$t"
done
