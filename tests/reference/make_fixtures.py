"""Generate the reference fixtures in tests/reference/ for dbtrail's tests.

Source of every value: scipy and mpmath from PyPI (versions are recorded in
each JSON file's "source" field; generated with scipy 1.17.1, mpmath 1.3.0,
numpy 2.4.6 on Python 3.11).

Files written:
  pchip.json      scipy.interpolate.PchipInterpolator: knot slopes and values
                  at query points (inside the knot range and extrapolated).
  bessel_i0.json  I0(x) and exp(-x)*I0(x): mpmath.besseli at 40 digits
                  (correctly rounded to double), with scipy.special.i0 / i0e
                  alongside and checked against mpmath to 1e-14 relative.
  diode.json      exponential-diode peak detector with capacitive hold and
                  DC load, solved with mpmath.findroot at 40 digits.

Deterministic (no randomness). Rerun from the repo root with:
    python3 tests/reference/make_fixtures.py
"""
import json
import math
import os

import mpmath
import numpy as np
import scipy
from mpmath import mp
from scipy.interpolate import PchipInterpolator
from scipy.special import i0, i0e

mp.dps = 40
OUT = os.path.dirname(os.path.abspath(__file__))
K_B = mpmath.mpf("1.380649e-23")     # J/K, exact (SI 2019)
Q_E = mpmath.mpf("1.602176634e-19")  # C, exact (SI 2019)


def write(name, obj):
    path = os.path.join(OUT, name)
    with open(path, "w") as f:
        json.dump(obj, f, indent=1)
        f.write("\n")
    print(f"wrote {os.path.relpath(path)}")


def vt(t):
    return K_B * mpmath.mpf(t) / Q_E


def diode_vo(n, vl, t, vpk):
    """Solve exp(-Vo/(n*Vt))*I0(Vpk/(n*Vt)) - 1 = Vo/V_L (vl=None: open circuit)."""
    nvt = mpmath.mpf(n) * vt(t)
    ln_i0 = mpmath.log(mpmath.besseli(0, mpmath.mpf(vpk) / nvt))
    v_open = nvt * ln_i0
    if vl is None:
        return v_open
    vl = mpmath.mpf(vl)
    # Log form, strictly decreasing in Vo on (0, v_open]; root bracketed there.
    f = lambda vo: ln_i0 - vo / nvt - mpmath.log1p(vo / vl)
    return mpmath.findroot(f, (v_open * mpmath.mpf("1e-30"), v_open), solver="anderson")


# ---------------------------------------------------------------- pchip
def dbm_to_vpk(dbm):
    return mpmath.sqrt(2 * 50 * mpmath.mpf("1e-3") * mpmath.power(10, mpmath.mpf(dbm) / 10))


diode_dbm = list(range(-30, 21, 3))  # -30, -27, ..., 18
pchip_cases = [
    ("references", [0.01, 0.5, 1, 2, 4, 6], [0, 0.1, 0.25, 0.3, 0.9, 0.8]),
    ("two_points", [1, 3], [2, -4]),
    ("three_points_flat", [0, 1, 2], [1, 1, 1]),
    ("monotone_decreasing", [-3, -1.5, 0, 0.5, 2, 7], [40, 31, 22, 20, 5, -10]),
    ("diode_like_logv",
     [float(mpmath.log(diode_vo(1.05, None, 300, dbm_to_vpk(d)))) for d in diode_dbm],
     diode_dbm),
    ("uneven_spacing", [0, 0.001, 0.002, 1, 100, 100.5], [0, 1, 1.5, 2, 10, 10.1]),
    ("sign_change_ends", [0, 1, 2, 3, 4], [0, 3, 2.5, 2.6, 0]),
]
cases = []
for name, x, y in pchip_cases:
    x = np.array(x, dtype=float)
    y = np.array(y, dtype=float)
    p = PchipInterpolator(x, y)  # extrapolate=True by default
    h0, h1 = x[1] - x[0], x[-1] - x[-2]
    outside = [x[0] - 0.1 * h0, x[0] - 0.01 * h0, x[-1] + 0.01 * h1, x[-1] + 0.1 * h1]
    xq = np.unique(np.concatenate([np.linspace(x[0], x[-1], 50), x, outside]))
    cases.append({"name": name, "x": x.tolist(), "y": y.tolist(),
                  "slopes": p(x, 1).tolist(), "xq": xq.tolist(), "yq": p(xq).tolist()})
write("pchip.json", {"source": f"scipy.interpolate.PchipInterpolator, scipy {scipy.__version__}",
                     "cases": cases})

# ---------------------------------------------------------------- bessel I0
xs = [0, 1e-8, 1e-4, 0.01, 0.1, 0.5, 1, 2, 3, 5, 7.5, 8, 10, 15, 20, 29.9, 30, 30.1,
      50, 100, 300, 700, 710, 1000, 1e4, 1e6]
points = []
for x in map(float, xs):
    m_i0 = mpmath.besseli(0, x)
    m_i0e = m_i0 * mpmath.exp(-x)
    ref_i0 = float(m_i0) if m_i0 < mpmath.mpf(np.finfo(float).max) else math.inf
    s_i0, s_i0e = float(i0(x)), float(i0e(x))
    if math.isinf(ref_i0):
        assert math.isinf(s_i0), (x, s_i0)
    elif math.isinf(s_i0):  # scipy forms exp(x)*i0e(x), so it overflows once exp(x) does
        assert x > math.log(np.finfo(float).max), (x, ref_i0)
        print(f"note: scipy i0({x:g}) = inf, true value {ref_i0!r} is finite")
    else:
        assert abs(s_i0 - ref_i0) <= 1e-14 * ref_i0, (x, s_i0, ref_i0)
    assert abs(s_i0e - float(m_i0e)) <= 1e-14 * float(m_i0e), (x, s_i0e, m_i0e)
    points.append({"x": x, "i0": None if math.isinf(ref_i0) else ref_i0,
                   "i0_scipy": None if math.isinf(s_i0) else s_i0,
                   "i0e": float(m_i0e), "i0e_scipy": s_i0e})
write("bessel_i0.json", {
    "source": f"mpmath {mpmath.__version__} besseli(0, x) at 40 digits, correctly rounded "
              f"(i0, i0e); scipy {scipy.__version__} scipy.special.i0/i0e (i0_scipy, i0e_scipy); "
              "agree to 1e-14 relative; null = overflows a double "
              "(scipy's i0 overflows for x > ln(DBL_MAX) ~ 709.78 even where I0 is finite)",
    "points": points})

# ---------------------------------------------------------------- diode
VPKS = [1e-4, 1e-3, 0.01, 0.03, 0.1, 0.3, 1.0, 3.0, 10.0, 30.0]
dcases = []
for n, t in [(1.0, 300.0), (1.0, 290.0), (1.05, 300.0), (1.05, 290.0), (1.2, 300.0)]:
    for vl in [None, 0.3, 0.01, 10.0]:
        for vpk in VPKS:
            vo = diode_vo(n, vl, t, vpk)
            if vl is not None:  # residual of the original (non-log) equation
                nvt = n * vt(t)
                r = mpmath.exp(-vo / nvt) * mpmath.besseli(0, vpk / nvt) - 1 - vo / vl
                assert abs(r) < mpmath.mpf("1e-30") * (1 + vo / vl), (n, vl, t, vpk, r)
            dcases.append({"n": n, "vl": vl, "t": t, "vpk": vpk, "vo": float(vo)})
write("diode.json", {
    "source": f"mpmath {mpmath.__version__} at 40 digits (findroot), "
              "exp(-Vo/(n*Vt))*I0(Vpk/(n*Vt)) - 1 = Vo/V_L, Vt = k*T/q, "
              "k = 1.380649e-23 J/K, q = 1.602176634e-19 C; vl null = open circuit",
    "cases": dcases})


def lookup(n, vl, t, vpk):
    return next(c["vo"] for c in dcases if (c["n"], c["vl"], c["t"], c["vpk"]) == (n, vl, t, vpk))


sanity = [((1.0, None, 300.0, 1e-3), 9.66953e-6), ((1.0, None, 300.0, 1.0), 0.929079),
          ((1.05, 0.3, 300.0, 0.01), 0.837614e-3), ((1.05, 0.3, 300.0, 0.1), 53.9814e-3),
          ((1.05, 0.3, 300.0, 1.0), 0.888823)]
for args, want in sanity:
    got = lookup(*args)
    print(f"sanity n={args[0]} vl={args[1]} T={args[2]} vpk={args[3]}: vo={got:.9g} (expect {want:.6g})")
    assert float(f"{got:.6g}") == want, (args, got, want)
print(f"scipy {scipy.__version__}, mpmath {mpmath.__version__}, numpy {np.__version__}")
