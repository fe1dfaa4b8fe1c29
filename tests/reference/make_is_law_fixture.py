"""Writes is_law.json: the diode saturation current's temperature law, and the peak
detector's output at a board temperature, evaluated directly with mpmath at 40 digits.

Law (the diode model of circuit simulators, SPICE parameters XTI and EG):
    Is(T) = Is(T0) * (T/T0)**(XTI/n) * exp((T/T0 - 1) * EG / (n * Vt)),  Vt = k*T/q
The detector output Vo solves, with V_L(T) = Is(T) * RL (RL fixed):
    ln(1 + Vo/V_L(T)) + Vo/(n*Vt) = ln I0(Vpk/(n*Vt))

Source: mpmath 1.3.0 (besseli, findroot), Python 3.11. No randomness: the cases are a
grid of invented but bench-like values. Run from the repo root:
    pip install mpmath
    python3 tests/reference/make_is_law_fixture.py
"""

import json

import mpmath as mp

mp.mp.dps = 40
K = mp.mpf("1.380649e-23")
Q = mp.mpf("1.602176634e-19")


def ratio(t, t0, n, xti, eg):
    t, t0 = mp.mpf(t), mp.mpf(t0)
    vt = K * t / Q
    return (t / t0) ** (mp.mpf(xti) / n) * mp.exp((t / t0 - 1) * mp.mpf(eg) / (n * vt))


def output(vpk, n, vl, t):
    vt = K * mp.mpf(t) / Q
    nvt = mp.mpf(n) * vt
    c = mp.log(mp.besseli(0, mp.mpf(vpk) / nvt))
    balance = lambda vo: mp.log(1 + vo / vl) + vo / nvt - c
    # The open-circuit output c*nVt bounds the loaded one from above.
    vo = mp.findroot(balance, (mp.mpf(0), c * nvt), solver="anderson")
    assert 0 < vo <= c * nvt and abs(balance(vo)) < mp.mpf("1e-30"), (vpk, n, vl, t)
    return vo


def main():
    cases = []
    for t0 in (300.0, 298.15):
        for t in (253.15, 273.15, 290.0, 310.0, 323.15, 358.15):
            for n, xti, eg in ((1.05, 2.0, 0.69), (1.2, 3.0, 1.11), (1.0, 2.0, 0.69)):
                for vl0 in (1e-3, 0.05, 2.0):
                    for vpk in (0.003, 0.05, 0.8):
                        r = ratio(t, t0, n, xti, eg)
                        vo = output(vpk, n, mp.mpf(vl0) * r, t)
                        cases.append(
                            {
                                "t": t, "t0": t0, "n": n, "xti": xti, "eg_ev": eg,
                                "vl0": vl0, "vpk": vpk,
                                "ratio": float(r), "vo": float(vo),
                            }
                        )
    doc = {
        "source": "mpmath 1.3.0 at 40 digits: Is(T)/Is(T0) = (T/T0)^(XTI/n)"
        " exp((T/T0-1) EG/(n Vt)); Vo from findroot of the loaded peak-detector balance"
        " with V_L(T) = V_L(T0) Is(T)/Is(T0); k = 1.380649e-23 J/K, q = 1.602176634e-19 C",
        "cases": cases,
    }
    with open("tests/reference/is_law.json", "w") as f:
        json.dump(doc, f, indent=0)
        f.write("\n")
    print(f"wrote tests/reference/is_law.json ({len(cases)} cases)")


if __name__ == "__main__":
    main()
