"""Reference values for hierax::stats, from scipy 1.14.1 and statsmodels 0.14.4.

Run:  .venv-ref/bin/python tests/reference/make_stats_fixtures.py
Writes tests/data/stats/expected.json (inputs and expected outputs, float64
as repr strings so the Rust side parses them exactly).
"""
import json
import pathlib

import numpy as np
import scipy
import statsmodels
from scipy import stats
from statsmodels.stats.multitest import multipletests

OUT = pathlib.Path(__file__).resolve().parents[1] / "data" / "stats" / "expected.json"
rng = np.random.default_rng(20261201)


def f(v):
    return [repr(float(x)) for x in np.atleast_1d(v)]


cases = []
# Continuous, tied integers, and a strongly related pair.
x1 = rng.normal(size=20)
y1 = 0.4 * x1 + rng.normal(size=20)
x2 = rng.integers(0, 5, size=30).astype(float)
y2 = rng.integers(0, 4, size=30).astype(float) + 0.5 * x2
x3 = np.arange(50, dtype=float)
y3 = np.sqrt(x3) + 0.1 * rng.normal(size=50)
for name, x, y in [("normal_n20", x1, y1), ("ties_n30", x2, y2), ("monotone_n50", x3, y3)]:
    pr = stats.pearsonr(x, y)
    sr = stats.spearmanr(x, y)
    lr = stats.linregress(x, y)
    z = np.arctanh(pr.statistic)
    half = stats.norm.ppf(0.975) / np.sqrt(len(x) - 3)
    cases.append({
        "name": name, "x": f(x), "y": f(y),
        "pearson_r": f(pr.statistic)[0], "pearson_p": f(pr.pvalue)[0],
        "spearman_r": f(sr.statistic)[0], "spearman_p": f(sr.pvalue)[0],
        "fisher_lo": f(np.tanh(z - half))[0], "fisher_hi": f(np.tanh(z + half))[0],
        "slope": f(lr.slope)[0], "intercept": f(lr.intercept)[0], "r_squared": f(lr.rvalue ** 2)[0],
        "rankdata_x": f(stats.rankdata(x)),
    })

p = np.concatenate([rng.uniform(size=25) ** 3, [0.01, 0.01, 0.2, 1.0, 0.0]])
bh = multipletests(p, method="fdr_bh")[1]

OUT.parent.mkdir(parents=True, exist_ok=True)
OUT.write_text(json.dumps({
    "generator": "tests/reference/make_stats_fixtures.py",
    "versions": {"numpy": np.__version__, "scipy": scipy.__version__, "statsmodels": statsmodels.__version__},
    "correlations": cases,
    "bh_p": f(p), "bh_adjusted": f(bh),
}, indent=1) + "\n")
print("wrote", OUT)

# Kolmogorov-Smirnov against U(0,1): statistic exactly, p-value approximately.
# scipy 1.14.1 (stats/_ksstats.py, _kolmogn) evaluates the exact Durbin/Marsaglia-Tsang-Wang
# matrix for n <= 140 when n d^2 <= 0.754693, and for n > 140 when n d^1.5 <= 1.4; elsewhere it
# switches to Pomeranz's recursion, Pelz-Good's asymptotic series or 2*smirnov. The regime is
# recorded so the Rust test can hold the exact cases to rounding and say why the others differ.
ks_cases = []
for n, power in [(20, 1.0), (120, 1.0), (200, 1.0), (200, 1.4)]:
    u = rng.uniform(size=n) ** power
    r = stats.kstest(u, "uniform")
    d = r.statistic
    exact = (n <= 140 and n * d * d <= 0.754693) or (n > 140 and n * d ** 1.5 <= 1.4)
    ks_cases.append({"sample": f(u), "statistic": f(d)[0], "pvalue": f(r.pvalue)[0],
                     "scipy_exact_matrix": bool(exact)})
data = json.loads(OUT.read_text())
data["kstest_uniform"] = ks_cases
OUT.write_text(json.dumps(data, indent=1) + "\n")
print("added kstest cases")

# Ordinary least squares with covariates: statsmodels OLS (non-robust covariance).
import statsmodels.api as sm
n = 40
age = rng.uniform(8, 23, size=n)
sex = rng.integers(0, 2, size=n).astype(float)
fd = rng.gamma(2.0, 0.1, size=n)
y = -3.0 + 0.08 * age + 0.3 * sex - 1.5 * fd + rng.normal(scale=0.4, size=n)
X = np.column_stack([np.ones(n), age, sex, fd])
res = sm.OLS(y, X).fit()
data = json.loads(OUT.read_text())
data["ols"] = {"X": [f(row) for row in X], "y": f(y), "terms": ["intercept", "age", "sex", "fd"],
               "coef": f(res.params), "se": f(res.bse), "t": f(res.tvalues), "p": f(res.pvalues),
               "r_squared": f(res.rsquared)[0], "df_resid": int(res.df_resid)}
OUT.write_text(json.dumps(data, indent=1) + "\n")
print("added OLS case")
