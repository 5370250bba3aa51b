#!/usr/bin/env python3
# Reference values for the statistics module (src/stats), written once to
# tests/data/reference_stats.json and read by tests/stats_reference.rs.
#
# Command (from the crate root):
#     pip install scipy statsmodels && python3 scripts/reference_stats.py
#
# Reads the NIST StRD Pontius dataset in place from
# ../shared/reference-data/nist-strd/linear/Pontius.dat (or from
# $FITWRIGHT_STRD_DIR/linear/Pontius.dat); it is never copied into the repo,
# and the JSON holds no Pontius data, only values computed from it.
#
# Sources of the values:
# - scipy.stats: t, F, chi-squared and normal quantiles and tails; Shapiro-Wilk
#   (scipy.stats.shapiro, Royston's algorithm AS R94).
# - statsmodels: OLS fits, leverage, studentized residuals and Cook's distance
#   (OLSInfluence), Durbin-Watson (statsmodels.stats.stattools.durbin_watson),
#   AIC/BIC/log-likelihood of OLS fits, nested F (compare_f_test) and the
#   lack-of-fit F as an ANOVA of the line against the cell-means model
#   (anova_lm), and the runs test normal statistic
#   (statsmodels.sandbox.stats.runs, when available).
# - This script, from scratch: the exact runs distribution of Swed and
#   Eisenhart (1943), computed with exact integer combinatorics (math.comb,
#   fractions.Fraction: no floating point until the final division) and
#   cross-checked against brute-force enumeration of all arrangements for
#   small counts; and the pure-error / lack-of-fit sums of squares by direct
#   group sums, cross-checked against statsmodels' ANOVA.
#
# Datasets other than Pontius are invented test vectors (invented scenarios:
# a load cell, a gas sensor, an assay, a platinum resistance probe), written
# below as literal arrays or drawn from a seeded generator; their values are
# stored in the JSON so the Rust tests use exactly the same numbers.
#
# Weighted fits: the reference for leverage, Cook's distance and studentized
# residuals is OLS on the whitened problem (sqrt(w)*y on sqrt(w)*X), which is
# the definition SPEC section 13 uses (h = diag(W^1/2 J (J'WJ)^-1 J'W^1/2),
# Pearson residuals sqrt(w)*e). statsmodels' OLSInfluence applied to a WLS
# result uses a different (unwhitened-row) hat diagonal, so it is not used.

import itertools
import json
import math
import os
import sys
from fractions import Fraction

import numpy as np
import scipy
import scipy.stats as st
import statsmodels
import statsmodels.api as sm
from statsmodels.stats.anova import anova_lm
from statsmodels.stats.outliers_influence import OLSInfluence
from statsmodels.stats.stattools import durbin_watson

try:
    from statsmodels.sandbox.stats.runs import Runs
except ImportError:  # pragma: no cover - depends on the statsmodels version
    Runs = None

HERE = os.path.dirname(os.path.abspath(__file__))
CRATE = os.path.dirname(HERE)
OUT = os.path.join(CRATE, "tests", "data", "reference_stats.json")


def strd_dir():
    env = os.environ.get("FITWRIGHT_STRD_DIR")
    if env:
        return env
    return os.path.join(CRATE, "..", "shared", "reference-data", "nist-strd")


def read_strd_data(path):
    """Data rows of an NIST StRD file, located by its 'Data (lines a to b)' header."""
    with open(path, encoding="ascii") as fh:
        lines = fh.read().splitlines()
    first = last = None
    for line in lines:
        if line.strip().startswith("Data") and "lines" in line:
            words = line.replace("(", " ").replace(")", " ").split()
            first, last = int(words[-3]), int(words[-1])
            break
    if first is None:
        raise SystemExit(f"{path}: no 'Data (lines a to b)' header")
    rows = [list(map(float, lines[i - 1].split())) for i in range(first, last + 1)]
    return np.array(rows)


# ---------------------------------------------------------------- runs test


def runs_exact_cdf(n1, n2, r):
    """P(R <= r) for n1 and n2 signs, Swed & Eisenhart (1943), exact rational.

    Arrangements with exactly k runs: k = 2j: 2*C(n1-1, j-1)*C(n2-1, j-1);
    k = 2j+1: C(n1-1, j-1)*C(n2-1, j) + C(n1-1, j)*C(n2-1, j-1).
    """

    def comb(n, k):
        return math.comb(n, k) if 0 <= k <= n else 0

    total = math.comb(n1 + n2, n1)
    count = 0
    for k in range(2, r + 1):
        j = k // 2
        if k % 2 == 0:
            count += 2 * comb(n1 - 1, j - 1) * comb(n2 - 1, j - 1)
        else:
            count += comb(n1 - 1, j - 1) * comb(n2 - 1, j) + comb(n1 - 1, j) * comb(n2 - 1, j - 1)
    return Fraction(count, total)


def count_runs(signs):
    return 1 + sum(1 for a, b in zip(signs, signs[1:]) if a != b)


def brute_force_cdf(n1, n2, r):
    n = n1 + n2
    hit = total = 0
    for pos in itertools.combinations(range(n), n1):
        s = [0] * n
        for i in pos:
            s[i] = 1
        total += 1
        hit += count_runs(s) <= r
    return Fraction(hit, total)


for n1, n2 in [(1, 1), (2, 3), (4, 4), (5, 7), (6, 3), (3, 8)]:
    for r in range(2, n1 + n2 + 1):
        assert runs_exact_cdf(n1, n2, r) == brute_force_cdf(n1, n2, r), (n1, n2, r)


def runs_reference(signs):
    """Reference figures for a sign sequence (True = positive)."""
    n1 = sum(1 for s in signs if s)
    n2 = len(signs) - n1
    r = count_runs(signs)
    n = n1 + n2
    mu = 1 + 2 * n1 * n2 / n
    var = 2 * n1 * n2 * (2 * n1 * n2 - n) / (n * n * (n - 1))
    z_cc = (r + 0.5 - mu) / math.sqrt(var)
    z_plain = (r - mu) / math.sqrt(var)
    out = {
        "n_pos": n1,
        "n_neg": n2,
        "runs": r,
        "expected_runs": mu,
        "method": "exact" if (n1 <= 20 and n2 <= 20) else "normal",
        "p_normal_cc": float(st.norm.cdf(z_cc)),
        "z_cc": z_cc,
    }
    if n1 + n2 <= 100:
        exact = runs_exact_cdf(n1, n2, r)
        out["p_exact"] = float(exact)
        out["p_exact_fraction"] = f"{exact.numerator}/{exact.denominator}"
        out["min_p_exact"] = float(runs_exact_cdf(n1, n2, 2))
    out["min_p_normal_cc"] = float(st.norm.cdf((2.5 - mu) / math.sqrt(var)))
    if Runs is not None:
        # statsmodels applies the 0.5 correction only for n < 50 (and then
        # towards zero); compare the statistic it reports with ours.
        z_sm, _ = Runs(np.array([1 if s else 0 for s in signs])).runs_test(correction=True)
        z_ours = z_plain if n >= 50 else ((r - mu + 0.5) / math.sqrt(var) if r - mu < 0.5 else None)
        if z_ours is not None:
            assert abs(z_sm - z_ours) < 1e-12, (z_sm, z_ours)
        out["statsmodels_z"] = float(z_sm)
        out["statsmodels_z_corrected"] = n < 50
    return out


# ---------------------------------------------------------------- fits


def design(x, degree):
    return np.vander(np.asarray(x, float), degree + 1, increasing=True)


def lack_of_fit_reference(x, y, w, fitted, p):
    x, y, w = map(np.asarray, (x, y, w))
    levels = np.unique(x)
    c, n = len(levels), len(x)
    if not (c > p and n > c):
        return None
    ss_pe = 0.0
    for lv in levels:
        sel = x == lv
        mean = np.sum(w[sel] * y[sel]) / np.sum(w[sel])
        ss_pe += float(np.sum(w[sel] * (y[sel] - mean) ** 2))
    ssr = float(np.sum(w * (y - fitted) ** 2))
    f = ((ssr - ss_pe) / (c - p)) / (ss_pe / (n - c))
    pval = float(st.f.sf(f, c - p, n - c))
    return {"groups": c, "ss_pure_error": ss_pe, "ss_lack_of_fit": ssr - ss_pe,
            "dof_lack_of_fit": c - p, "dof_pure_error": n - c, "f": f, "p_value": pval}


def fit_reference(name, source, x, y, degree, weights=None, include_data=True, x_scale=1.0):
    """Fit y on a polynomial of x and record every statistic of interest.

    x_scale rescales x before building the design (Pontius: x up to 3e6, so
    x**2 ~ 1e13); leverage, residuals and every statistic below are
    invariant under that column scaling.
    """
    x = np.asarray(x, float)
    y = np.asarray(y, float)
    n = len(x)
    w = np.ones(n) if weights is None else np.asarray(weights, float)
    sw = np.sqrt(w)
    X = design(x * x_scale, degree)
    p = X.shape[1]
    # Whitened OLS: identical to WLS for estimates and the SPEC's definitions.
    res = sm.OLS(sw * y, X * sw[:, None]).fit()
    if weights is not None:
        wls = sm.WLS(y, X, weights=w).fit()
        assert np.allclose(wls.params, res.params, rtol=1e-10, atol=0)
    infl = OLSInfluence(res)
    h = infl.hat_matrix_diag
    # Cross-check the leverage by an independent thin QR.
    q, _ = np.linalg.qr(X * sw[:, None])
    assert np.allclose(h, np.sum(q * q, axis=1), rtol=1e-9, atol=1e-14)
    fitted = X @ res.params
    e = y - fitted
    pearson = sw * e
    assert np.allclose(pearson, res.resid, rtol=1e-9, atol=1e-15 * np.max(np.abs(y)))
    order = np.argsort(x, kind="stable")
    sw_res = st.shapiro(pearson)
    signs = [bool(v > 0) for v in pearson[order] if v != 0]
    out = {
        "name": name,
        "source": source,
        "degree": degree,
        "n": n,
        "p": p,
        "params_scaled_x": res.params.tolist(),
        "x_scale": x_scale,
        "ssr_w": float(res.ssr),
        "s": float(np.sqrt(res.scale)),
        "leverage": h.tolist(),
        "standardized": infl.resid_studentized_internal.tolist(),
        "studentized": infl.resid_studentized_external.tolist(),
        "cooks_distance": infl.cooks_distance[0].tolist(),
        "durbin_watson_x_order": float(durbin_watson(pearson[order])),
        "shapiro_w": float(sw_res.statistic),
        "shapiro_p": float(sw_res.pvalue),
        "runs_x_order": runs_reference(signs),
        "lack_of_fit": lack_of_fit_reference(x, y, w, fitted, p),
    }
    if include_data:
        out["x"] = x.tolist()
        out["y"] = y.tolist()
        out["weights"] = None if weights is None else w.tolist()
    if weights is None:
        # statsmodels' Gaussian log-likelihood keeps the constants that
        # SPEC section 13 drops: aic_sm = n ln(SSR/n) + n(1 + ln 2 pi) + 2p.
        out["statsmodels_llf"] = float(res.llf)
        out["statsmodels_aic"] = float(res.aic)
        out["statsmodels_bic"] = float(res.bic)
        out["statsmodels_aicc_k_p_plus_1"] = float(
            sm.tools.eval_measures.aicc(res.llf, n, p + 1))
    lof = out["lack_of_fit"]
    if lof is not None:
        # Cross-check: ANOVA of this model against the cell-means model.
        groups = np.unique(x, return_inverse=True)[1]
        G = np.zeros((n, groups.max() + 1))
        G[np.arange(n), groups] = 1.0
        full = sm.OLS(sw * y, G * sw[:, None]).fit()
        table = anova_lm(res, full)
        f_sm = float(table["F"].iloc[1])
        p_sm = float(table["Pr(>F)"].iloc[1])
        assert abs(f_sm - lof["f"]) <= 1e-9 * lof["f"], (f_sm, lof["f"])
        lof["statsmodels_anova_f"] = f_sm
        lof["statsmodels_anova_p"] = p_sm
    return out, res


def nested_reference(small, large):
    f, pval, df = large.compare_f_test(small)
    return {"ssr_small": float(small.ssr), "dof_small": int(small.df_resid),
            "ssr_large": float(large.ssr), "dof_large": int(large.df_resid),
            "f": float(f), "p_value": float(pval), "dof_num": int(df)}


def main():
    ref = {
        "generated_by": "scripts/reference_stats.py",
        "command": "pip install scipy statsmodels && python3 scripts/reference_stats.py",
        "versions": {
            "python": sys.version.split()[0],
            "numpy": np.__version__,
            "scipy": scipy.__version__,
            "statsmodels": statsmodels.__version__,
        },
    }

    # ------------------------------------------------------- quantiles
    q = {"t_upper": [], "t_lower": [], "f_upper": [], "chi2_upper": [], "chi2_lower": [],
         "normal_lower": [], "t_sf": [], "f_sf": [], "chi2_sf": []}
    for dof in [1, 2, 3, 5, 10, 17, 30, 37, 100, 1000, 100000]:
        for a in [0.1, 0.05, 0.025, 0.01, 0.005, 0.001, 1e-6]:
            q["t_upper"].append({"alpha": a, "dof": dof, "value": float(st.t.isf(a, dof))})
    for dof in [1, 4, 20]:
        for p_ in [0.001, 0.2, 0.5, 0.7]:
            q["t_lower"].append({"p": p_, "dof": dof, "value": float(st.t.ppf(p_, dof))})
    for d1, d2 in [(1, 1), (1, 10), (2, 20), (3, 30), (5, 10), (10, 10), (17, 20), (1, 37),
                   (4, 100), (20, 1000), (2, 7), (1, 2)]:
        for a in [0.1, 0.05, 0.01, 0.001]:
            q["f_upper"].append({"alpha": a, "d1": d1, "d2": d2,
                                 "value": float(st.f.isf(a, d1, d2))})
    for dof in [1, 2, 5, 10, 37, 100, 1000]:
        for a in [0.999, 0.975, 0.5, 0.05, 0.001, 1e-9]:
            q["chi2_upper"].append({"alpha": a, "dof": dof, "value": float(st.chi2.isf(a, dof))})
        for p_ in [1e-6, 0.01, 0.3]:
            q["chi2_lower"].append({"p": p_, "dof": dof, "value": float(st.chi2.ppf(p_, dof))})
    for p_ in [1e-12, 1e-6, 0.001, 0.025, 0.3, 0.5, 0.9, 0.975, 0.999999]:
        q["normal_lower"].append({"p": p_, "value": float(st.norm.ppf(p_))})
    for t_, dof in [(0.5, 3), (2.0, 10), (-1.5, 7), (12.0, 4), (40.0, 5), (3.0, 1000)]:
        q["t_sf"].append({"x": t_, "dof": dof, "value": float(st.t.sf(t_, dof))})
    for x_, d1, d2 in [(0.5, 3, 9), (3.0, 2, 20), (1e3, 2, 20), (25.0, 17, 20), (1.0, 1, 1)]:
        q["f_sf"].append({"x": x_, "d1": d1, "d2": d2, "value": float(st.f.sf(x_, d1, d2))})
    for x_, dof in [(0.1, 1), (3.0, 2), (18.3, 10), (200.0, 10), (1100.0, 1000)]:
        q["chi2_sf"].append({"x": x_, "dof": dof, "value": float(st.chi2.sf(x_, dof))})
    ref["quantiles"] = q

    # NIST/SEMATECH e-Handbook tables, typed from memory: cross-checked here
    # against scipy so a misremembered entry fails loudly.
    handbook_t = {  # table 1.3.6.7.2: upper critical values, columns alpha
        # The alpha = 0.001 entry for 1 dof is left out: as remembered
        # (318.313) it differs from the exact 318.309 by more than rounding.
        1: [3.078, 6.314, 12.706, 31.821, 63.657, None],
        2: [1.886, 2.920, 4.303, 6.965, 9.925, 22.327],
        5: [1.476, 2.015, 2.571, 3.365, 4.032, 5.893],
        10: [1.372, 1.812, 2.228, 2.764, 3.169, 4.144],
        20: [1.325, 1.725, 2.086, 2.528, 2.845, 3.552],
        30: [1.310, 1.697, 2.042, 2.457, 2.750, 3.385],
        100: [1.290, 1.660, 1.984, 2.364, 2.626, 3.174],
    }
    alphas = [0.10, 0.05, 0.025, 0.01, 0.005, 0.001]
    hb = []
    for dof, row in handbook_t.items():
        for a, v in zip(alphas, row):
            if v is None:
                continue
            s = float(st.t.isf(a, dof))
            assert abs(s - v) <= 0.0005 + 1e-12, ("t", dof, a, v, s)
            hb.append({"table": "1.3.6.7.2", "dist": "t", "alpha": a, "dof": dof,
                       "table_value": v, "scipy": s})
    handbook_f = [  # table 1.3.6.7.3: upper critical values (alpha, d1, d2, value)
        (0.05, 1, 1, 161.448), (0.05, 1, 10, 4.965), (0.05, 2, 20, 3.493),
        (0.05, 3, 30, 2.922), (0.05, 5, 10, 3.326), (0.05, 10, 10, 2.978),
        (0.01, 1, 1, 4052.181), (0.01, 5, 10, 5.636), (0.10, 1, 1, 39.863),
    ]
    for a, d1, d2, v in handbook_f:
        s = float(st.f.isf(a, d1, d2))
        assert abs(s - v) <= 0.0005 + 1e-12, ("F", a, d1, d2, v, s)
        hb.append({"table": "1.3.6.7.3", "dist": "F", "alpha": a, "d1": d1, "d2": d2,
                   "table_value": v, "scipy": s})
    ref["handbook_cross_check"] = hb

    # ------------------------------------------------------- Shapiro-Wilk
    rng = np.random.default_rng(61)
    samples = {
        "n3_invented": [2.1, 3.7, 4.0],
        "n4_invented": [10.2, 9.7, 10.9, 10.0],
        "n5_invented": [0.51, 0.47, 0.55, 0.49, 0.62],
        "n6_invented": [1.0, 1.1, 1.3, 0.9, 1.2, 2.4],
        "n7_invented": [2.1, 3.7, 4.0, 5.5, 1.2, 3.3, 4.4],
        "n11_invented": [5.2, 4.8, 5.1, 5.0, 4.9, 5.3, 5.05, 4.95, 5.15, 4.85, 6.4],
        "n12_invented": [3.1, 2.9, 3.0, 3.2, 2.8, 3.05, 2.95, 3.15, 2.85, 3.0, 3.1, 2.9],
        "n20_normal_seeded": rng.normal(50.0, 2.0, 20).round(4).tolist(),
        "n50_exponential_seeded": rng.exponential(1.0, 50).round(5).tolist(),
        "n137_normal_seeded": rng.normal(0.0, 1e-3, 137).round(8).tolist(),
        "n1000_uniform_seeded": rng.uniform(-1.0, 1.0, 1000).round(6).tolist(),
        "n4000_normal_seeded": rng.normal(0.0, 1.0, 4000).round(6).tolist(),
    }
    ref["shapiro"] = []
    for name, values in samples.items():
        r = st.shapiro(values)
        ref["shapiro"].append({"name": name, "values": values, "w": float(r.statistic),
                               "p": float(r.pvalue)})

    # ------------------------------------------------------- runs
    sequences = {
        "two_runs": "+++++-------",
        "mixed": "+-++--+-+---",
        "alternating": "+-+-+-+-+-+-",
        "two_runs_largest_exact": "+" * 20 + "-" * 20,
        "mixed_largest_exact": "++-+++---+++--+-+++----++-+-----++-+++--",
        "mixed_b": "++-+++--+-++-+++--+-",
        "single_positive": "---+--",
        "tiny": "++--",
        "mixed_normal": "+++-++--+++---++---+++----+--+++----++--+++---+",
        "few_runs_normal": "+" * 10 + "-" * 8 + "+" * 12 + "-" * 14 + "+" * 8 + "-" * 8,
        "just_past_exact": "++++----++++++-----++++----------++++++--",
    }
    ref["runs"] = []
    for name, s in sequences.items():
        signs = [ch == "+" for ch in s]
        n_pos = sum(signs)
        entry = {"name": f"{n_pos}pos_{len(signs) - n_pos}neg_{name}", "signs": s}
        entry.update(runs_reference(signs))
        ref["runs"].append(entry)

    # ------------------------------------------------------- fits
    datasets = []
    nested = []

    lc_x = [0, 0, 10, 10, 20, 20, 30, 30, 40, 40, 50, 50]
    lc_y = [0.0012, -0.0008, 0.2031, 0.2009, 0.4018, 0.3995, 0.6027, 0.6003,
            0.8011, 0.7986, 1.0019, 0.9994]
    d, lin = fit_reference("load_cell_line", "invented test vector (load cell, mV/V vs kg)",
                           lc_x, lc_y, 1)
    datasets.append(d)

    gs_x = [10, 10, 10, 25, 25, 25, 50, 50, 50, 100, 100, 100, 200, 200, 200]
    gs_y = [18.913, 18.89, 18.94, 39.116, 39.443, 39.347, 68.397, 68.623, 68.06,
            119.356, 119.083, 119.628, 208.311, 207.172, 207.167]
    d, gs_lin = fit_reference("gas_sensor_line_on_curve",
                              "invented test vector (gas sensor, power-law response fitted "
                              "by a straight line)", gs_x, gs_y, 1)
    datasets.append(d)
    d, gs_quad = fit_reference("gas_sensor_quadratic", "invented test vector (as above, quadratic)",
                               gs_x, gs_y, 2)
    datasets.append(d)
    nested.append(dict(name="gas_sensor_mandel", **nested_reference(gs_lin, gs_quad)))

    as_x = [1, 1, 2, 2, 5, 5, 10, 10, 20, 20]
    as_y = [0.9235, 0.9358, 1.8615, 1.8809, 4.5706, 4.5531, 8.8939, 9.0852, 17.7564, 18.1363]
    as_w = [1.0 / (v * v) for v in as_x]
    d, _ = fit_reference("assay_weighted_line",
                         "invented test vector (assay, weights 1/x^2)", as_x, as_y, 1,
                         weights=as_w)
    datasets.append(d)

    rtd_x = [-20, -10, 0, 10, 20, 30, 40, 50, 60]
    rtd_y = [921.758, 960.985, 1000.01, 1039.01, 1077.748, 1116.516, 1155.083, 1193.635,
             1231.814]
    d, _ = fit_reference("rtd_quadratic", "invented test vector (platinum resistance probe, "
                         "ohm vs degC)", rtd_x, rtd_y, 2)
    datasets.append(d)

    pontius_path = os.path.join(strd_dir(), "linear", "Pontius.dat")
    data = read_strd_data(pontius_path)
    py, px = data[:, 0], data[:, 1]
    d, p_quad = fit_reference("pontius_quadratic", "NIST StRD Pontius (read in place)",
                              px, py, 2, include_data=False, x_scale=1e-6)
    # Sanity check against the certified values (B1, B2 scaled back).
    b = np.array(d["params_scaled_x"]) * np.array([1.0, 1e-6, 1e-12])
    cert = [0.673565789473684E-03, 0.732059160401003E-06, -0.316081871345029E-14]
    assert np.allclose(b, cert, rtol=1e-9), (b, cert)
    assert abs(d["s"] - 0.205177424076185E-03) < 1e-12
    datasets.append(d)
    d, p_lin = fit_reference("pontius_line", "NIST StRD Pontius (read in place), straight line",
                             px, py, 1, include_data=False, x_scale=1e-6)
    datasets.append(d)
    nested.append(dict(name="pontius_mandel", **nested_reference(p_lin, p_quad)))

    ref["datasets"] = datasets
    ref["nested"] = nested

    os.makedirs(os.path.dirname(OUT), exist_ok=True)
    with open(OUT, "w", encoding="utf-8") as fh:
        json.dump(ref, fh, indent=1)
        fh.write("\n")
    print(f"wrote {os.path.relpath(OUT, CRATE)}")


if __name__ == "__main__":
    main()
