#!/usr/bin/env python3
"""Interleaved wall times of commands that read the same capture, so that each sees the
same phase of a shared machine. `wc` as a name runs `wc -l` on the file after --replay.

Usage: benches/interleave.py N BIN[,BIN...] ARGS...
e.g.   benches/interleave.py 15 wc,target/release/dbtrail record --replay a.txt \\
           --profile profiles/demo-diode.toml --rate 10k --every 1s --out r.csv --force
"""
import statistics
import subprocess
import sys
import time

runs, names, args = int(sys.argv[1]), sys.argv[2].split(","), sys.argv[3:]
times = {name: [] for name in names}
for _ in range(runs):
    for name in names:
        cmd = ["wc", "-l", args[args.index("--replay") + 1]] if name == "wc" else [name] + args
        start = time.perf_counter()
        subprocess.run(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, check=True)
        times[name].append(time.perf_counter() - start)
for name in names:
    t = sorted(times[name])
    print(f"{name:40s} min {t[0]*1e3:7.1f}  p25 {t[len(t)//4]*1e3:7.1f}  median {statistics.median(t)*1e3:7.1f} ms")
