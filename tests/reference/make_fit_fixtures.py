"""Generate tests/reference/weighted_fits.json: weighted least-squares fits and their
parameter covariance from scipy, for dbtrail's weighted diode and log-amp fits.

Source of every value: scipy.optimize.curve_fit (method "trf", 3-point Jacobian, tight
tolerances) with sigma= and absolute_sigma=True (covariance (J^T W J)^-1 as it stands)
and absolute_sigma=False (scaled by chi-square / (n - 2)); scipy.stats.chi2.ppf for the
95th percentiles of chi-square. The points are invented: a known curve plus Gaussian
noise of the stated standard uncertainty from numpy's default_rng with a fixed seed,
written into the fixture so the Rust test reads the same numbers.

Rerun from the repo root with:
    python3 tests/reference/make_fit_fixtures.py
"""
import json
import math
import os

import numpy as np
import scipy
from scipy.optimize import brentq, curve_fit
from scipy.special import i0e
from scipy.stats import chi2

OUT = os.path.dirname(os.path.abspath(__file__))
K_OVER_Q = 1.380649e-23 / 1.602176634e-19  # V/K, exact (SI 2019)
OHMS = 50.0
KELVIN = 300.0
VOLTS_PER_COUNT = 1.2 / 4095.0


def diode_volts(dbm, n, ln_vl):
    """Output of the exponential-diode peak detector with DC load V_L = Is*RL:
    ln(1 + Vo/V_L) + Vo/(n*Vt) = ln I0(Vpk/(n*Vt))."""
    n_vt = n * K_OVER_Q * KELVIN
    vl = math.exp(ln_vl)
    vpk = math.sqrt(2.0 * OHMS * 1e-3 * 10.0 ** (dbm / 10.0))
    x = vpk / n_vt
    c = math.log(i0e(x)) + x
    f = lambda vo: math.log1p(vo / vl) + vo / n_vt - c
    return brentq(f, 0.0, c * n_vt, xtol=1e-18, rtol=4 * np.finfo(float).eps, maxiter=500)


def diode_model(dbm, n, ln_vl):
    return np.array([diode_volts(d, n, ln_vl) for d in np.atleast_1d(dbm)])


def fit(model, x, y, sigma, p0, absolute):
    popt, pcov = curve_fit(model, x, y, p0=p0, sigma=sigma, absolute_sigma=absolute,
                           method="trf", jac="3-point", ftol=1e-15, xtol=1e-15, gtol=1e-15,
                           max_nfev=10000)
    r = (y - model(x, *popt)) / sigma
    return popt.tolist(), pcov.tolist(), float(np.sum(r * r))


rng = np.random.default_rng(20261202)
cases = []

# A diode detector: n = 1.07, V_L = 0.25 V, 13 levels, each point the mean of 64 samples
# with 1.5 counts of noise (u = 1.5/8 counts), and one of 2 counts at the two lowest.
levels = np.arange(-20.0, 10.01, 2.5)
std_counts = np.where(levels < -16.0, 2.0, 1.5)
u_volts = std_counts / math.sqrt(64.0) * VOLTS_PER_COUNT
true_volts = diode_model(levels, 1.07, math.log(0.25))
volts = true_volts + rng.normal(0.0, u_volts)
for absolute in (True, False):
    popt, pcov, chisq = fit(diode_model, levels, volts, u_volts, [1.1, math.log(0.3)], absolute)
    cases.append({"model": "diode", "absolute_sigma": absolute, "dbm": levels.tolist(),
                  "volts": volts.tolist(), "u_volts": u_volts.tolist(), "kelvin": KELVIN,
                  "ohms": OHMS, "params": popt, "covariance": pcov, "chi_square": chisq})

# A log-amp line: V = 0.025*(P + 84), 9 levels, noise growing towards the bottom.
levels = np.arange(-60.0, 0.01, 7.5)
u_volts = 0.0004 + 0.00002 * (-levels)
volts = 0.025 * (levels + 84.0) + rng.normal(0.0, u_volts)
line = lambda x, slope, b0: slope * x + b0
for absolute in (True, False):
    popt, pcov, chisq = fit(line, levels, volts, u_volts, [0.02, 2.0], absolute)
    cases.append({"model": "log", "absolute_sigma": absolute, "dbm": levels.tolist(),
                  "volts": volts.tolist(), "u_volts": u_volts.tolist(), "params": popt,
                  "covariance": pcov, "chi_square": chisq})

quantiles = [{"dof": k, "chi2_95": float(chi2.ppf(0.95, k))} for k in range(1, 41)]

path = os.path.join(OUT, "weighted_fits.json")
with open(path, "w") as f:
    json.dump({"source": f"scipy {scipy.__version__} scipy.optimize.curve_fit (trf, 3-point "
                         f"jac, sigma=, absolute_sigma=) and scipy.stats.chi2.ppf; numpy "
                         f"{np.__version__} default_rng(20261202) for the invented noise; "
                         "diode params are (n, ln V_L), log params (slope V/dB, V at 0 dBm)",
               "cases": cases, "chi2_95": quantiles}, f, indent=1)
    f.write("\n")
print(f"wrote {os.path.relpath(path)}")
for c in cases:
    print(c["model"], c["absolute_sigma"], c["params"], c["chi_square"])
print(f"scipy {scipy.__version__}, numpy {np.__version__}")
