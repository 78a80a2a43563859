"""Reference values for the `timescale` module (hierax issue 3).

Run with the pinned reference environment (tests/reference/requirements.txt):
    .venv-ref/bin/python tests/reference/make_timescale_fixtures.py
Writes tests/data/timescale/fixtures.json. Versions used are recorded in the
file itself. All series are invented (seeded simulations), not real data.

What each block holds:
* "acf": statsmodels.tsa.stattools.acf(x, nlags=L, adjusted=False, fft=False)
  on fixed series (the direct-sum definition, not statsmodels' own FFT path).
* "welch": scipy.signal.welch(x, fs=1/TR, window="hann", nperseg=L,
  noverlap=L//2, detrend="constant", scaling="density").
* "exp_fit": scipy.optimize.curve_fit of a*(exp(-k*TR/tau)+b) to the
  statsmodels ACF over lags FIRST..LAST, method "lm", from p0 = (1, tau0, 0).
* "knee_fit": scipy.optimize.curve_fit of b - log10(k + f**chi) to
  log10 of the Welch density at f > 0, from hierax's documented start
  (chi = 2, k = f_mid**2 with f_mid the geometric mean of the band ends, b
  matching the first frequency).
"""

import json
import pathlib

import numpy as np
import scipy
import statsmodels
from scipy import optimize, signal
from statsmodels.tsa.stattools import acf

OUT = pathlib.Path(__file__).resolve().parents[1] / "data" / "timescale" / "fixtures.json"


def ar(n, coefs, rng, trend=0.0, burn=500):
    e = rng.standard_normal(n + burn)
    x = np.zeros(n + burn)
    for t in range(len(coefs), n + burn):
        x[t] = sum(c * x[t - i - 1] for i, c in enumerate(coefs)) + e[t]
    x = x[burn:]
    return x + trend * np.arange(n) + 10.0


def main():
    rng = np.random.default_rng(20240613)
    series = {
        "ar1_phi06_n300": (ar(300, [0.6], rng), 40, 2.0),
        "ar2_n500": (ar(500, [0.5, 0.3], rng), 60, 0.72),
        "ar1_phi09_trend_n1200": (ar(1200, [0.9], rng, trend=0.002), 300, 0.72),
        "white_n64": (rng.standard_normal(64), 63, 2.0),
    }
    out = {
        "versions": {"numpy": np.__version__, "scipy": scipy.__version__, "statsmodels": statsmodels.__version__},
        "acf": [],
        "welch": [],
        "exp_fit": [],
        "knee_fit": [],
    }
    for name, (x, lags, tr) in series.items():
        r = acf(x, nlags=lags, adjusted=False, fft=False)
        out["acf"].append({"name": name, "x": x.tolist(), "max_lag": lags, "acf": r.tolist()})

        seg = min(128, len(x))
        f, p = signal.welch(x, fs=1.0 / tr, window="hann", nperseg=seg, noverlap=seg // 2,
                            detrend="constant", scaling="density")
        out["welch"].append({"name": name, "x": x.tolist(), "tr_s": tr, "segment": seg,
                             "freq_hz": f.tolist(), "density": p.tolist()})

        if name.startswith("white"):
            continue
        first, last = 1, min(lags, 20)
        k = np.arange(first, last + 1) * tr
        y = r[first:last + 1]
        tau0 = 2.0 * tr

        def expm(k, a, tau, b):
            return a * (np.exp(-k / tau) + b)

        popt, _ = optimize.curve_fit(expm, k, y, p0=[1.0, tau0, 0.0], method="lm",
                                     ftol=1e-15, xtol=1e-15, gtol=1e-15, maxfev=100000)
        out["exp_fit"].append({"name": name, "acf": r.tolist(), "tr_s": tr, "first": first, "last": last,
                               "tau0_s": tau0, "amplitude": popt[0], "tau_s": popt[1], "offset": popt[2]})

        fp = f[f > 0]
        lp = np.log10(p[f > 0])
        fmid = np.exp(0.5 * np.log(fp[0]) + 0.5 * np.log(fp[-1]))
        k0 = fmid ** 2
        b0 = lp[0] + np.log10(k0 + fp[0] ** 2)

        def knee(f, b, kk, chi):
            return b - np.log10(kk + f ** chi)

        kopt, _ = optimize.curve_fit(knee, fp, lp, p0=[b0, k0, 2.0], method="lm",
                                     ftol=1e-15, xtol=1e-15, gtol=1e-15, maxfev=100000)
        out["knee_fit"].append({"name": name, "freq_hz": f.tolist(), "density": p.tolist(),
                                "offset": kopt[0], "knee": kopt[1], "exponent": kopt[2],
                                "tau_s": 1.0 / (2.0 * np.pi * kopt[1] ** (1.0 / kopt[2]))})
    OUT.parent.mkdir(parents=True, exist_ok=True)
    OUT.write_text(json.dumps(out, indent=1) + "\n")
    print(f"wrote {OUT}")


if __name__ == "__main__":
    main()
