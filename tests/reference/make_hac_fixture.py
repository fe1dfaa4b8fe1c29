"""Generate tests/reference/hac.json: Newey-West (HAC) standard errors of a least-squares
slope from statsmodels, for dbtrail's drift standard error (src/report/soak.rs).

Source of every value:
- `slope`, `stderr[L]`: statsmodels `OLS(y, X).fit(cov_type="HAC", cov_kwds={"maxlags": L})`
  with X = [1, t]. Its convention (statsmodels 0.15.0, checked in its source,
  `regression/linear_model.py` and `stats/sandwich_covariance.py`): Bartlett weights
  1 - j/(L + 1) for j = 1..L, and `use_correction` False by default for "HAC" in OLS,
  so no small-sample factor n/(n - k). The fixture states both.
- `prewhitened`: the AR(1)-prewhitened estimate (Andrews & Monahan 1992) as dbtrail
  forms it, done here with numpy and statsmodels' kernel sum
  `sandwich_covariance.S_hac_simple` on the filtered moment series: rho is the residuals'
  least-squares AR(1) coefficient plus (2 + 4 rho)/n, clamped to [0, 0.97]; e_i = g_i -
  rho g_(i-1) with g_i = (t_i - mean t) u_i; L from Andrews' (1991) AR(1) plug-in for the
  Bartlett kernel, floor(1.1447 (alpha m)^(1/3)), alpha = 4 r^2 / ((1 - r)^2 (1 + r)^2),
  r the AR(1) coefficient of the filtered residuals and m = n - 1; SE = sqrt(S / (1 -
  rho)^2) / Sxx.
- `andrews_lags`: the plug-in formula above at the listed (rho, n), by hand in Python.

The series is invented: 240 rows 10 s apart (t in hours), a drift of -0.12 dB/h on
30 dBm plus AR(1) noise (rho 0.9, innovations 0.005 dB) from numpy's default_rng with a
fixed seed; its values are written into the fixture so the Rust test reads the same
numbers.

Rerun from the repo root with:
    python3 tests/reference/make_hac_fixture.py
"""
import json
import math
import os

import numpy as np
import statsmodels
import statsmodels.api as sm
from statsmodels.stats.sandwich_covariance import S_hac_simple

OUT = os.path.dirname(os.path.abspath(__file__))
LAGS = [0, 1, 3, 8, 20, 60]


def andrews_lags(r, m):
    alpha = 4.0 * r * r / ((1.0 - r) ** 2 * (1.0 + r) ** 2)
    return int(math.floor(1.1447 * (alpha * m) ** (1.0 / 3.0)))


def ar1(u):
    return float(np.sum(u[1:] * u[:-1]) / np.sum(u[:-1] ** 2))


def prewhitened(t, y):
    n = len(t)
    X = sm.add_constant(t)
    res = sm.OLS(y, X).fit()
    u = res.resid
    rho = min(max(ar1(u) + (2.0 + 4.0 * ar1(u)) / n, 0.0), 0.97)
    c = t - t.mean()
    g = c * u
    e = g[1:] - rho * g[:-1]
    eu = u[1:] - rho * u[:-1]
    lags = andrews_lags(ar1(eu), n - 1)
    # S_hac_simple divides by nothing: it returns the weighted sum of cross products.
    s = float(S_hac_simple(e[:, None], nlags=lags)[0, 0]) / (1.0 - rho) ** 2
    sxx = float(np.sum(c * c))
    return {"rho": rho, "lags": lags, "stderr": math.sqrt(s) / sxx}


rng = np.random.default_rng(20261202)
n = 240
t = np.arange(n) * 10.0 / 3600.0
noise = np.empty(n)
noise[0] = rng.normal(0.0, 0.005 / math.sqrt(1 - 0.81))
for i in range(1, n):
    noise[i] = 0.9 * noise[i - 1] + rng.normal(0.0, 0.005)
y = 30.0 - 0.12 * t + noise

X = sm.add_constant(t)
stderr = {}
slope = None
for L in LAGS:
    fit = sm.OLS(y, X).fit(cov_type="HAC", cov_kwds={"maxlags": L})
    assert fit.cov_kwds["use_correction"] is False
    slope = float(fit.params[1])
    stderr[str(L)] = float(fit.bse[1])

# Hand check of the kernel convention: lag 0 is White's heteroscedastic estimate.
u = y - X @ np.linalg.lstsq(X, y, rcond=None)[0]
c = t - t.mean()
white = math.sqrt(float(np.sum((c * u) ** 2))) / float(np.sum(c * c))
assert abs(white / stderr["0"] - 1) < 1e-12

cases = [(0.5, 100), (0.9, 720), (0.95, 720), (0.3, 239)]
fixture = {
    "source": "statsmodels %s OLS(y, [1, t]).fit(cov_type='HAC', cov_kwds={'maxlags': L}), "
    "Bartlett weights 1 - j/(L+1), use_correction False; prewhitened via "
    "statsmodels.stats.sandwich_covariance.S_hac_simple and numpy %s (see "
    "make_hac_fixture.py)" % (statsmodels.__version__, np.__version__),
    "t_hours": t.tolist(),
    "dbm": y.tolist(),
    "slope_db_per_hour": slope,
    "stderr_by_lags": stderr,
    "prewhitened": prewhitened(t, y),
    "andrews_lags": [{"rho": r, "n": m, "lags": andrews_lags(r, m)} for r, m in cases],
}
path = os.path.join(OUT, "hac.json")
with open(path, "w") as f:
    json.dump(fixture, f, indent=1)
print("wrote", path, fixture["stderr_by_lags"], fixture["prewhitened"])
