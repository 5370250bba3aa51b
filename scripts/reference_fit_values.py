"""Reference values for tests/reference_fits.rs, generated once with statsmodels and scipy.

Run: python3 scripts/reference_fit_values.py   (numpy 2.4, scipy 1.17, statsmodels 0.15)
and paste the printed constants into tests/reference_fits.rs.

The data are invented calibration scenarios (no real instrument or laboratory):
- A: a gas sensor's response against test-gas concentration, quadratic, weighted by 1/u^2.
- B: a thermistor probe's resistance against temperature, beta model, weighted by 1/u^2.
"""
import numpy as np
import statsmodels.api as sm
from scipy import optimize, stats

np.set_printoptions(precision=17)


def arr(name, v):
    print(f"const {name}: [f64; {len(v)}] = [{', '.join(repr(float(x)) for x in v)}];")


def num(name, v):
    print(f"const {name}: f64 = {float(v)!r};")


# A: weighted quadratic (linear in the parameters).
xa = np.array([0.0, 25.0, 50.0, 100.0, 200.0, 300.0, 400.0, 600.0, 800.0])
ya = np.array([0.012, 0.871, 1.702, 3.391, 6.604, 9.731, 12.790, 18.612, 24.205])
ua = np.array([0.005, 0.006, 0.008, 0.012, 0.020, 0.030, 0.040, 0.060, 0.080])
wa = 1.0 / ua**2
X = np.column_stack([np.ones_like(xa), xa, xa**2])
res = sm.WLS(ya, X, weights=wa).fit()
print("// A: statsmodels WLS")
arr("A_X", xa); arr("A_Y", ya); arr("A_U", ua)
arr("A_PARAMS", res.params)
arr("A_BSE", res.bse)
arr("A_COV", res.cov_params().ravel())
num("A_RSQUARED", res.rsquared)
num("A_RSQUARED_ADJ", res.rsquared_adj)
num("A_SSR", res.ssr)
ci = res.conf_int(alpha=0.05)
arr("A_CI_LOW", ci[:, 0]); arr("A_CI_HIGH", ci[:, 1])
x0, u0 = 350.0, 0.035
pred = res.get_prediction(np.array([[1.0, x0, x0**2]]), weights=np.array([1.0 / u0**2])).summary_frame(alpha=0.05)
num("A_X0", x0); num("A_U0", u0)
num("A_MEAN_CI_LOW", pred["mean_ci_lower"].iloc[0]); num("A_MEAN_CI_HIGH", pred["mean_ci_upper"].iloc[0])
num("A_OBS_CI_LOW", pred["obs_ci_lower"].iloc[0]); num("A_OBS_CI_HIGH", pred["obs_ci_upper"].iloc[0])

# B: weighted nonlinear beta model R = R25 * exp(B * (1/(T+273.15) - 1/298.15)).
tb = np.array([-20.0, -10.0, 0.0, 10.0, 20.0, 25.0, 30.0, 40.0, 50.0, 60.0])
rb = np.array([96210.0, 55480.0, 32910.0, 19950.0, 12450.0, 10010.0, 8070.0, 5340.0, 3610.0, 2490.0])
ub = 0.01 * rb + 10.0


def beta(t, r25, b):
    return r25 * np.exp(b * (1.0 / (t + 273.15) - 1.0 / 298.15))


p0 = [9000.0, 3500.0]
kw = dict(p0=p0, sigma=ub, method="lm", xtol=1e-15, ftol=1e-15, gtol=1e-15, maxfev=100000)
popt_r, pcov_r = optimize.curve_fit(beta, tb, rb, absolute_sigma=False, **kw)
popt_w, pcov_w = optimize.curve_fit(beta, tb, rb, absolute_sigma=True, **kw)
resid = (rb - beta(tb, *popt_r)) / ub
chi2 = float(np.sum(resid**2))
dof = len(tb) - 2
print("// B: scipy.optimize.curve_fit (MINPACK lm), absolute_sigma False / True")
arr("B_T", tb); arr("B_R", rb); arr("B_U", ub); arr("B_START", p0)
arr("B_PARAMS", popt_r)
arr("B_COV_RESIDUALS", pcov_r.ravel())
arr("B_COV_WEIGHTS", pcov_w.ravel())
num("B_CHI2", chi2)
num("B_CHI2_P", stats.chi2.sf(chi2, dof))
num("B_T975_8", stats.t.ppf(0.975, dof))
