#!/usr/bin/env bash
# End-to-end figures for docs/performance.md: replay throughput against `wc -l`, the live
# serial path through a pseudo-terminal, latency, the screen's CPU use, a day's soak on the
# simulated clock, and start-up. Uses /usr/bin/time, wc, tmux and python3.
# Usage: benches/run.sh [LIVE_SECONDS]   (default 60)
set -euo pipefail
cd "$(dirname "$0")/.."
live_s=${1:-60}
cargo build --release -q
bin=target/release/dbtrail
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
# The plain path's figures: the demo diode without its board's temperature channel (one
# channel a sample, as before temperature); the board's own path is measured after.
board=profiles/demo-diode.toml
profile="$work/plain.toml"
sed '/^\[temperature\]/,$d' "$board" > "$profile"
secs() { /usr/bin/time -f "%e %M" "$@" 2>&1 >/dev/null | tail -1; }

echo "machine: $(nproc) cores, $(grep -m1 'model name' /proc/cpuinfo | cut -d: -f2 | xargs); $(date -u +%F)"
"$bin" sim --scenario soak --rate 10k --seconds 2000 --profile "$profile" --out "$work/a.txt"
"$bin" sim --scenario soak --rate 10k --seconds 2000 --profile "$profile" --format binary --out "$work/b.bin"
"$bin" sim --scenario soak --rate 10k --seconds 2000 --format binary --out "$work/t.bin"
# Best of five wall times, to the microsecond (/usr/bin/time rounds to 10 ms).
best() {
    python3 - "$@" <<'PY'
import subprocess, sys, time
runs = []
for _ in range(5):
    t = time.perf_counter()
    subprocess.run(sys.argv[1:], stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, check=True)
    runs.append(time.perf_counter() - t)
print(f"{min(runs):.4f}")
PY
}
wc_s=$(best wc -l "$work/a.txt")
ascii_s=$(best "$bin" record --replay "$work/a.txt" --profile "$profile" --rate 10k --every 1s --out "$work/r.csv" --force)
bin_s=$(best "$bin" record --replay "$work/b.bin" --profile "$profile" --rate 10k --every 1s --out "$work/r.csv" --force)
board_s=$(best "$bin" record --replay "$work/t.bin" --profile "$board" --rate 10k --every 1s --out "$work/r.csv" --force)
python3 - "$wc_s" "$ascii_s" "$bin_s" "$board_s" <<'PY'
import sys
wc, a, b, t = map(float, sys.argv[1:])
n = 20e6
print(f"replay ascii 20M samples: {a:.3f} s = {n/a/1e6:.0f} M samples/s; wc -l {wc:.3f} s; ratio {a/max(wc,1e-3):.1f}x")
print(f"replay binary 20M samples: {b:.3f} s = {n/b/1e6:.0f} M samples/s")
print(f"replay binary 20M samples with the board's temperature (2 channels, compensated): {t:.3f} s = {n/t/1e6:.0f} M samples/s")
PY

read -r h1 m1 < <(secs "$bin" record --demo soak --rate 10k --duration 1h --fast --every 1s --out "$work/s1.csv")
read -r h24 m24 < <(secs "$bin" record --demo soak --rate 10k --duration 24h --fast --every 1s --out "$work/s24.csv")
echo "soak 1 h fast: $h1 s, peak RSS $m1 KB; 24 h fast (864 M samples): $h24 s, peak RSS $m24 KB ($(python3 -c "print(f'{100*($m24/$m1-1):+.1f}')") %)"

"$bin" sim --scenario soak --rate 1M --format binary --seconds "$live_s" --profile "$profile" --pty > "$work/pty" &
sim=$!
sleep 0.3
port=$(head -1 "$work/pty")
"$bin" record --port "$port" --profile "$profile" --format binary --every 1s --duration "$((live_s + 2))s" --out "$work/live.csv" 2> "$work/live.err"
wait "$sim" || true
echo "live pty, binary, 1 M samples/s for $live_s s: $(grep -o 'link: .*' "$work/live.err")"

# The same, scraped ten times a second through --metrics while it runs.
"$bin" sim --scenario soak --rate 1M --format binary --seconds "$live_s" --profile "$profile" --pty > "$work/pty2" &
sim=$!
sleep 0.3
port=$(head -1 "$work/pty2")
"$bin" record --port "$port" --profile "$profile" --format binary --every 1s --duration "$((live_s + 2))s" --out "$work/live2.csv" --metrics 0 2> "$work/live2.err" &
rec=$!
scraped=$(python3 benches/scrape.py "$work/live2.err" "$live_s" 10)
wait "$rec"
wait "$sim" || true
echo "live pty, binary, 1 M samples/s for $live_s s, scraped 10/s: $(grep -o 'link: .*' "$work/live2.err"); $scraped"

python3 benches/latency.py "$bin" "$profile" 10 1000

if command -v tmux >/dev/null; then
    sock=bench-$$
    tmux -L "$sock" new-session -d -x 100 -y 30 "$bin watch --demo tune --rate 10k"
    sleep 2
    pid=$(pgrep -n -f "watch --demo tune --rate 10k")
    t0=$(awk '{print $14+$15}' /proc/"$pid"/stat); sleep 10; t1=$(awk '{print $14+$15}' /proc/"$pid"/stat)
    tmux -L "$sock" kill-server
    python3 -c "print(f'watch at 10 k samples/s: {($t1-$t0)/$(getconf CLK_TCK)/10*100:.1f} % of one core (both threads, 10 s)')"
    tmux -L "$sock" new-session -d -x 100 -y 30 "bash --norc"
    start=$(date +%s.%N)
    tmux -L "$sock" send-keys "$bin watch --demo" Enter
    until tmux -L "$sock" capture-pane -p | grep -q "dBm"; do sleep 0.005; done
    end=$(date +%s.%N)
    tmux -L "$sock" kill-server
    python3 -c "print(f'start-up to the first frame of watch --demo: {($end-$start)*1000:.0f} ms (tmux polling, 5 ms steps)')"
fi
