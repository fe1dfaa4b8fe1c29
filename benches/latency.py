#!/usr/bin/env python3
"""Latency from a line written to a pseudo-terminal to its row on `record --every 0 --out -`.

Usage: benches/latency.py DBTRAIL PROFILE [SECONDS] [RATE]
Writes one ASCII sample per 1/RATE s (default 1000/s for 10 s) with a distinct count,
reads the recorder's stdout, and prints the p50, p99 and max latency in milliseconds.
"""
import os, select, subprocess, sys, time, tty

bin_, profile = sys.argv[1], sys.argv[2]
seconds = float(sys.argv[3]) if len(sys.argv) > 3 else 10.0
rate = float(sys.argv[4]) if len(sys.argv) > 4 else 1000.0
master, slave = os.openpty()
tty.setraw(slave)
path = os.ttyname(slave)
rec = subprocess.Popen([bin_, "record", "--port", path, "--profile", profile, "--every", "0",
                        "--out", "-", "--duration", f"{seconds + 3}s"],
                       stdout=subprocess.PIPE, stderr=subprocess.DEVNULL, pass_fds=())
time.sleep(1.0)
os.write(master, b"# latency probe\n")
sent, got, buf = {}, {}, b""
fd = rec.stdout.fileno()
n = int(seconds * rate)
start = time.monotonic()
for i in range(n):
    due = start + i / rate
    while True:
        now = time.monotonic()
        wait = due - now
        r, _, _ = select.select([fd], [], [], max(wait, 0))
        if r:
            chunk = os.read(fd, 65536)
            t = time.monotonic()
            buf += chunk
            *lines, buf = buf.split(b"\n")
            for line in lines:
                cols = line.split(b",")
                if len(cols) >= 2 and cols[1].isdigit():
                    got.setdefault(int(cols[1]), t)
        if time.monotonic() >= due:
            break
    count = 100 + (i % 3000)
    key = count
    os.write(master, f"{count}\n".encode())
    sent.setdefault(key, []).append(time.monotonic())
    # Use each count once per cycle: match by the last send before the row arrived.
deadline = time.monotonic() + 2
while time.monotonic() < deadline:
    r, _, _ = select.select([fd], [], [], 0.1)
    if r:
        chunk = os.read(fd, 65536)
        if not chunk:
            break
        buf += chunk
rec.kill()
# Counts repeat every 3000 samples; measure only the first cycle, where each count is unique.
lat = sorted((got[c] - sent[c][0]) * 1000 for c in range(100, 100 + min(n, 3000)) if c in got)
if not lat:
    sys.exit("no rows came back")
p = lambda q: lat[min(len(lat) - 1, int(q * len(lat)))]
print(f"latency over {len(lat)} samples at {rate:.0f}/s: p50 {p(0.5):.3f} ms, p99 {p(0.99):.3f} ms, max {lat[-1]:.3f} ms")
