#!/usr/bin/env python3
"""Scrapes a running `dbtrail record --metrics` ten times a second, as a busy time-series
engine would, for the load figure in docs/performance.md.

Usage: benches/scrape.py STDERR_FILE SECONDS [PER_SECOND]
Waits for the recorder to name its address on its standard error (STDERR_FILE) and to
serve its first snapshot, then GETs /metrics PER_SECOND times a second (default 10) for SECONDS, and prints how many
scrapes were answered with a whole OpenMetrics text (ending in `# EOF`), how many
failed, how many held a power, and the p50, p99 and max time to an answer in milliseconds.
"""
import re, sys, time, urllib.request

path, seconds = sys.argv[1], float(sys.argv[2])
per_second = float(sys.argv[3]) if len(sys.argv) > 3 else 10.0
deadline = time.monotonic() + 10
addr = None
while addr is None and time.monotonic() < deadline:
    with open(path, encoding="utf-8", errors="replace") as f:
        m = re.search(r"metrics at (http://\S+/metrics)", f.read())
    addr = m.group(1) if m else time.sleep(0.05)
if addr is None:
    sys.exit("the recorder never named its metrics address")
# Until the run's first batch the endpoint answers 503: the count starts once it serves.
while time.monotonic() < deadline:
    try:
        with urllib.request.urlopen(addr, timeout=5):
            break
    except OSError:
        time.sleep(0.05)
times, failed, with_power = [], 0, 0
start = time.monotonic()
n = int(seconds * per_second)
for i in range(n):
    due = start + i / per_second
    time.sleep(max(0.0, due - time.monotonic()))
    t0 = time.monotonic()
    try:
        with urllib.request.urlopen(addr, timeout=5) as answer:
            body = answer.read()
        if body.endswith(b"# EOF\n"):
            times.append(time.monotonic() - t0)
            with_power += b"dbtrail_power_dbm{" in body
        else:
            failed += 1
    except OSError:
        failed += 1
times.sort()
pick = lambda q: 1e3 * times[min(len(times) - 1, int(q * len(times)))] if times else float("nan")
print(f"{len(times)} of {n} scrapes answered ({with_power} with a power), {failed} failed; "
      f"p50 {pick(0.5):.2f} ms, p99 {pick(0.99):.2f} ms, max {1e3 * times[-1] if times else float('nan'):.2f} ms")
