"""Generate tests/reference/allan.json: overlapping Allan deviations from allantools, for
dbtrail's report::allan::overlapping_adev.

Source of every deviation: allantools.oadev(y, rate=1/tau0, data_type="freq", taus=...)
(allantools 2024.06, numpy 2.4.6, Python 3.11). The series are invented: white noise,
a random walk and a ramp on a level in dBm, the NIST SP 1065 nine-point test data, and a
white-noise series with missing values (NaN). numpy's default_rng with a fixed seed makes
the noise; the series themselves are written into the fixture so the Rust test reads the
same numbers.

The averaging times asked for are dbtrail's rule (m = 1, 2, 4 ... while at least 2m + 1
overlapping pairs are complete; N >= 4m without missing values), so the fixture also pins
which points the library gives. allantools does not skip missing values (a NaN inside the
series makes every deviation NaN), so for the series with gaps each gap-free stretch goes
through allantools on its own and the variances are pooled by their pair counts:
sigma^2 = sum(n_k * oadev_k^2) / sum(n_k), which is what summing over the complete
positions only means. Stretch lengths are not powers of two, so no stretch has exactly
2m values (allantools drops a one-pair result as too small).

Rerun from the repo root with:
    python3 -m venv /tmp/venv && /tmp/venv/bin/pip install numpy allantools
    /tmp/venv/bin/python3 tests/reference/make_allan_fixtures.py
"""
import json
import math
import os

import allantools
import numpy as np

OUT = os.path.dirname(os.path.abspath(__file__))


def octaves(n_pairs_at):
    """Averaging factors m = 1, 2, 4 ... while n_pairs_at(m) >= 2m + 1."""
    m = 1
    while n_pairs_at(m) >= 2 * m + 1:
        yield m
        m *= 2


def oadev(y, tau0, ms):
    taus = [m * tau0 for m in ms]
    got_taus, dev, _err, ns = allantools.oadev(
        np.asarray(y, dtype=float), rate=1.0 / tau0, data_type="freq", taus=taus
    )
    assert np.allclose(got_taus, taus, rtol=0, atol=1e-12 * max(taus)), (got_taus, taus)
    return [float(d) for d in dev], [int(n) for n in ns]


def gap_free_case(name, what, y, tau0):
    y = np.round(y, 6)  # short in the fixture, and the same numbers on both sides
    ms = list(octaves(lambda m: len(y) - 2 * m + 1))
    dev, ns = oadev(y, tau0, ms)
    assert ns == [len(y) - 2 * m + 1 for m in ms], ns
    return {
        "name": name,
        "what": what,
        "tau0_s": tau0,
        "values": [float(v) for v in y],
        "tau_s": [m * tau0 for m in ms],
        "adev_db": dev,
        "pairs": ns,
    }


def stretches(y):
    """The gap-free stretches of y, as lists."""
    out, current = [], []
    for v in y:
        if math.isnan(v):
            if current:
                out.append(current)
            current = []
        else:
            current.append(v)
    if current:
        out.append(current)
    return out


def gapped_case(name, what, y, tau0):
    y = np.round(y, 6)
    parts = stretches(y)
    pairs_at = lambda m: sum(max(0, len(p) - 2 * m + 1) for p in parts)
    ms = list(octaves(pairs_at))
    devs = []
    for m in ms:
        weighted, total = 0.0, 0
        for p in parts:
            n = len(p) - 2 * m + 1
            if n < 1:
                continue
            assert n >= 2, "a stretch of exactly 2m values: allantools would drop it"
            (dev,), (got_n,) = oadev(p, tau0, [m])
            assert got_n == n
            weighted += n * dev * dev
            total += n
        devs.append(math.sqrt(weighted / total))
    return {
        "name": name,
        "what": what,
        "tau0_s": tau0,
        # JSON has no NaN: missing values are written as null.
        "values": [None if math.isnan(v) else float(v) for v in y],
        "tau_s": [m * tau0 for m in ms],
        "adev_db": devs,
        "pairs": [pairs_at(m) for m in ms],
    }


rng = np.random.default_rng(20261202)
cases = [
    gap_free_case(
        "white",
        "white noise of 0.02 dB on -20 dBm, 2000 rows of 10 s",
        -20.0 + rng.normal(0.0, 0.02, 2000),
        10.0,
    ),
    gap_free_case(
        "random_walk",
        "a random walk of 0.005 dB steps from -7.5 dBm, 1500 rows of 1 s",
        -7.5 + np.cumsum(rng.normal(0.0, 0.005, 1500)),
        1.0,
    ),
    gap_free_case(
        "ramp",
        "a ramp of 0.001 dB per row from -30 dBm, 1024 rows of 2 s",
        -30.0 + 0.001 * np.arange(1024),
        2.0,
    ),
    gap_free_case(
        "ramp_and_white",
        "a ramp of -0.12 dB/h from +3 dBm with white noise of 0.004 dB, 3000 rows of 1 s",
        3.0 - 0.12 / 3600.0 * np.arange(3000) + rng.normal(0.0, 0.004, 3000),
        1.0,
    ),
    gap_free_case(
        "nist_nine_point",
        "the NIST SP 1065 nine-point test data, tau0 = 1",
        np.array([892, 809, 823, 798, 671, 644, 883, 903, 677], dtype=float),
        1.0,
    ),
]

gapped = -12.0 + rng.normal(0.0, 0.01, 1200)
for start, length in [(300, 3), (517, 1), (700, 45), (1013, 6)]:
    gapped[start : start + length] = np.nan
lengths = [len(p) for p in stretches(gapped)]
assert all(n & (n - 1) != 0 for n in lengths), lengths
cases.append(
    gapped_case(
        "white_with_gaps",
        "white noise of 0.01 dB on -12 dBm, 1200 rows of 5 s, 55 of them missing in 4 gaps",
        gapped,
        5.0,
    )
)

fixture = {
    "source": "allantools %s oadev(data_type='freq'), numpy %s; series invented "
    "(default_rng(20261202)) but nist_nine_point (NIST SP 1065 test data); "
    "white_with_gaps pools allantools over its gap-free stretches; written by "
    "make_allan_fixtures.py" % (allantools.__version__, np.__version__),
    "cases": cases,
}
path = os.path.join(OUT, "allan.json")
with open(path, "w") as f:
    # One case a line keeps the file short and its diffs readable.
    f.write('{"source": %s,\n "cases": [\n' % json.dumps(fixture["source"]))
    f.write(",\n".join("  " + json.dumps(c) for c in cases))
    f.write("\n]}\n")
for c in cases:
    print(c["name"], list(zip(c["tau_s"], c["adev_db"]))[:3])
print("wrote", path)
