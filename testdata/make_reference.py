#!/usr/bin/python3
"""Export the open datasets and compute reference fits for lariat's objective.

Run with Debian's interpreter from the repository root or from testdata/:

    /usr/bin/python3 testdata/make_reference.py

It needs python3-sklearn, python3-numpy and python3-pandas from Debian
(bookworm: scikit-learn 1.2.1, numpy 1.24.2, pandas 1.5.3). CI never runs
this script; the Go tests read the committed CSV files and reference.json.

Steps:

1. Write diabetes.csv (Efron, Hastie, Johnstone & Tibshirani 2004, raw,
   unscaled: load_diabetes(scaled=False)) and wdbc.csv (Street, Wolberg &
   Mangasarian 1993; label malignant = 1) from scikit-learn's bundled copies.
2. Read the CSV files back (so the references are computed on exactly the
   values the Go tests parse), standardize every feature with its mean and
   POPULATION standard deviation (ddof = 0), and minimize

     F(b, θ) = (1/n) Σ ℓ(y_i, b + x̃_iᵀθ) + λ(α‖θ‖₁ + (1−α)/2 ‖θ‖²)

   with scikit-learn (ElasticNet for the squared loss, LogisticRegression for
   the logistic loss) or numpy (ridge closed form, OLS by lstsq).
3. Check every solution against the KKT conditions of F and, where the
   violation exceeds POLISH_TOL, polish it with a numpy proximal-gradient
   (FISTA with adaptive restart) run started from the library's solution.
   The JSON records which solver produced each case and its final violation.
4. Write reference.json.
"""

import json
import os
import platform
import sys
import warnings

import numpy as np
import pandas as pd
import sklearn
from sklearn.datasets import load_breast_cancer, load_diabetes
from sklearn.linear_model import ElasticNet, LogisticRegression

HERE = os.path.dirname(os.path.abspath(__file__))
POLISH_TOL = 1e-10  # target KKT violation of every reference

# λ fractions of λ_max. For α > 0, λ_max = max_j |x̃_jᵀ(y − ȳ)| / (nα), the
# smallest λ whose solution is θ = 0 (Friedman, Hastie & Tibshirani 2010).
# For ridge (α = 0) λ_max is infinite; its λ values are fractions of the
# lasso λ_max (α = 1) instead.
SQUARED_FRACTIONS = {1.0: [0.5, 0.1, 0.01], 0.5: [0.5, 0.1, 0.01], 0.0: [1.0, 0.1, 0.01]}
LOGISTIC_FRACTIONS = {1.0: [0.5, 0.1, 0.02], 0.5: [0.5, 0.1, 0.02], 0.0: [0.5, 0.1, 0.02]}
OLS_NEAR_FRACTION = 1e-6  # the λ → 0 case on diabetes, lasso


def export():
    """Write diabetes.csv and wdbc.csv; return their paths."""
    # scaled=False exists since scikit-learn 1.1; Debian bookworm ships 1.2.1.
    dia = load_diabetes(scaled=False)
    df = pd.DataFrame(dia.data, columns=list(dia.feature_names))
    df["progression"] = dia.target
    dpath = os.path.join(HERE, "diabetes.csv")
    df.to_csv(dpath, index=False, float_format=None)

    bc = load_breast_cancer()
    names = [n.replace(" ", "_") for n in bc.feature_names]
    wf = pd.DataFrame(bc.data, columns=names)
    # scikit-learn codes 0 = malignant, 1 = benign; we want 1 = malignant.
    wf["malignant"] = (bc.target == 0).astype(int)
    wpath = os.path.join(HERE, "wdbc.csv")
    wf.to_csv(wpath, index=False, float_format=None)
    return dpath, wpath


def load(path, label):
    df = pd.read_csv(path, float_precision="round_trip")
    y = df[label].to_numpy(dtype=float)
    names = [c for c in df.columns if c != label]
    X = df[names].to_numpy(dtype=float)
    return names, X, y


def standardize(X):
    mu = X.mean(axis=0)
    sd = X.std(axis=0, ddof=0)
    return (X - mu) / sd, mu, sd


def sigmoid(z):
    return np.where(z >= 0, 1 / (1 + np.exp(-np.abs(z))), np.exp(-np.abs(z)) / (1 + np.exp(-np.abs(z))))


def grad_smooth(loss, Xs, y, b, theta):
    """Gradient of (1/n) Σ ℓ with respect to (b, θ)."""
    eta = b + Xs @ theta
    r = eta - y if loss == "squared" else sigmoid(eta) - y
    n = len(y)
    return r.sum() / n, Xs.T @ r / n


def kkt(loss, Xs, y, b, theta, lam, alpha):
    """Max KKT violation of F at (b, θ) (Hastie, Tibshirani & Wainwright 2015, ch. 2, 5)."""
    gb, g = grad_smooth(loss, Xs, y, b, theta)
    v = abs(gb)
    nz = theta != 0
    full = g + lam * (1 - alpha) * theta
    v = max(v, np.max(np.abs(full[nz] + lam * alpha * np.sign(theta[nz])), initial=0.0))
    v = max(v, np.max(np.maximum(np.abs(full[~nz]) - lam * alpha, 0.0), initial=0.0))
    return float(v)


def smooth_value(loss, Xs, y, b, theta):
    eta = b + Xs @ theta
    if loss == "squared":
        return 0.5 * np.mean((y - eta) ** 2)
    return np.mean(np.logaddexp(0, eta) - y * eta)


def prox(z, t, alpha):
    return np.sign(z) * np.maximum(np.abs(z) - t * alpha, 0.0) / (1 + t * (1 - alpha))


def polish(loss, Xs, y, b, theta, lam, alpha, tol=POLISH_TOL, max_iter=2_000_000):
    """FISTA with adaptive restart (Beck & Teboulle 2009; O'Donoghue & Candès
    2015) on F, started at (b, θ); stops when the KKT violation <= tol."""
    n, d = Xs.shape
    A = np.hstack([np.ones((n, 1)), Xs])
    L = np.linalg.eigvalsh(A.T @ A / n).max() * (1.0 if loss == "squared" else 0.25)
    step = 1.0 / L
    w = np.concatenate([[b], theta])
    z = w.copy()
    t = 1.0
    for it in range(max_iter):
        gb, g = grad_smooth(loss, Xs, y, z[0], z[1:])
        wn = np.empty_like(w)
        wn[0] = z[0] - step * gb
        wn[1:] = prox(z[1:] - step * g, step * lam, alpha)
        # gradient-based restart
        if np.dot(z - wn, wn - w) > 0:
            t = 1.0
            z = w.copy()
            continue
        tn = (1 + np.sqrt(1 + 4 * t * t)) / 2
        z = wn + (t - 1) / tn * (wn - w)
        w, t = wn, tn
        if it % 200 == 0 and kkt(loss, Xs, y, w[0], w[1:], lam, alpha) <= tol:
            break
    return w[0], w[1:]


def fit_squared(Xs, y, lam, alpha):
    n = len(y)
    if alpha == 0:
        theta = np.linalg.solve(Xs.T @ Xs + n * lam * np.eye(Xs.shape[1]), Xs.T @ (y - y.mean()))
        return y.mean(), theta, "numpy closed form (X̃ᵀX̃ + nλI)⁻¹X̃ᵀ(y − ȳ)"
    m = ElasticNet(alpha=lam, l1_ratio=alpha, fit_intercept=True, tol=1e-12, max_iter=10**6)
    m.fit(Xs, y)
    return float(m.intercept_), m.coef_.copy(), "sklearn.linear_model.ElasticNet"


def fit_logistic(Xs, y, lam, alpha):
    n = len(y)
    C = 1.0 / (n * lam)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        if alpha == 0:
            m = LogisticRegression(penalty="l2", C=C, tol=1e-12, max_iter=100000,
                                   random_state=0)
            src = "sklearn.linear_model.LogisticRegression(penalty='l2', lbfgs)"
        else:
            m = LogisticRegression(penalty="elasticnet", solver="saga", l1_ratio=alpha, C=C,
                                   tol=1e-12, max_iter=100000, random_state=0)
            src = "sklearn.linear_model.LogisticRegression(penalty='elasticnet', saga)"
        m.fit(Xs, y)
    return float(m.intercept_[0]), m.coef_[0].copy(), src


def lambda_max(Xs, y, alpha):
    n = len(y)
    return float(np.max(np.abs(Xs.T @ (y - y.mean()))) / (n * alpha))


def case(dataset, loss, Xs, y, alpha, frac, lmax_alpha):
    lam = frac * lmax_alpha
    fit = fit_squared if loss == "squared" else fit_logistic
    b, theta, src = fit(Xs, y, lam, alpha)
    v0 = kkt(loss, Xs, y, b, theta, lam, alpha)
    v = v0
    if v > POLISH_TOL:
        b, theta = polish(loss, Xs, y, b, theta, lam, alpha)
        v = kkt(loss, Xs, y, b, theta, lam, alpha)
        src += " + numpy FISTA polish"
    obj = smooth_value(loss, Xs, y, b, theta) + lam * (alpha * np.abs(theta).sum()
                                                       + (1 - alpha) / 2 * theta @ theta)
    print(f"{dataset:8s} {loss:8s} α={alpha:<4} λ={lam:<12.6g} ({frac:g}·λmax) "
          f"nz={int(np.count_nonzero(theta)):2d} KKT library={v0:.2e} final={v:.2e}  [{src}]")
    return {
        "dataset": dataset,
        "loss": loss,
        "alpha": alpha,
        "lambda": lam,
        "lambda_fraction": frac,
        "intercept": float(b),
        "standardized": [float(t) for t in theta],
        "nonzero": int(np.count_nonzero(theta)),
        "objective": float(obj),
        "kkt": v,
        "kkt_library": v0,
        "solver": src,
    }


def main():
    dpath, wpath = export()
    out = {
        "generator": "testdata/make_reference.py",
        "objective": "F(b,θ) = (1/n) Σ ℓ(y_i, b + x̃_iᵀθ) + λ(α‖θ‖₁ + (1−α)/2‖θ‖²), "
                     "x̃ standardized by mean and population std (ddof 0), b unpenalized",
        "kkt": "max over the intercept gradient |∂b|, |g_j + λα sign θ_j + λ(1−α)θ_j| for θ_j ≠ 0, "
               "and max(0, |g_j| − λα) for θ_j = 0, where g = (1/n) X̃ᵀ ℓ'(y, η)",
        "versions": {
            "python": platform.python_version(),
            "sklearn": sklearn.__version__,
            "numpy": np.__version__,
            "pandas": pd.__version__,
            "debian_packages": "python3-sklearn 1.2.1+dfsg-1, python3-numpy 1:1.24.2-1+deb12u1, "
                               "python3-pandas 1.5.3+dfsg-2 (Debian 12 bookworm)",
        },
        "datasets": {},
        "cases": [],
    }
    sets = [("diabetes", dpath, "progression", "squared", SQUARED_FRACTIONS),
            ("wdbc", wpath, "malignant", "logistic", LOGISTIC_FRACTIONS)]
    for name, path, label, loss, fracs in sets:
        names, X, y = load(path, label)
        Xs, mu, sd = standardize(X)
        out["datasets"][name] = {
            "file": os.path.basename(path),
            "label": label,
            "rows": int(X.shape[0]),
            "features": names,
            "mean": [float(v) for v in mu],
            "std": [float(v) for v in sd],
            "lambda_max_lasso": lambda_max(Xs, y, 1.0),
        }
        for alpha in (1.0, 0.5, 0.0):
            lmax = lambda_max(Xs, y, alpha if alpha > 0 else 1.0)
            for frac in fracs[alpha]:
                out["cases"].append(case(name, loss, Xs, y, alpha, frac, lmax))
        if name == "diabetes":
            A = np.hstack([np.ones((len(y), 1)), Xs])
            coef, *_ = np.linalg.lstsq(A, y, rcond=None)
            out["ols"] = {
                "dataset": name,
                "solver": "numpy.linalg.lstsq on [1, X̃]",
                "intercept": float(coef[0]),
                "standardized": [float(c) for c in coef[1:]],
                "kkt": kkt("squared", Xs, y, coef[0], coef[1:], 0.0, 1.0),
                # The same fit on scikit-learn's scaled form (unit column norm,
                # x̃/√n): coefficients × √n, the scale of Efron et al. (2004).
                "unit_norm_scale": [float(c * np.sqrt(len(y))) for c in coef[1:]],
            }
            print("OLS standardized:", np.round(coef[1:], 4), "KKT", out["ols"]["kkt"])
            print("OLS unit-norm scale:", np.round(coef[1:] * np.sqrt(len(y)), 2))
            out["cases"].append(case(name, "squared", Xs, y, 1.0, OLS_NEAR_FRACTION,
                                     lambda_max(Xs, y, 1.0)))
    with open(os.path.join(HERE, "reference.json"), "w") as f:
        json.dump(out, f, indent=1, ensure_ascii=False)
        f.write("\n")
    worst = max(c["kkt"] for c in out["cases"])
    print(f"max KKT violation over {len(out['cases'])} cases: {worst:.2e}")
    if worst > POLISH_TOL:
        sys.exit("some reference misses the KKT target")


if __name__ == "__main__":
    main()
