#!/usr/bin/python3
"""Reference values for tests/ridge_test.cpp, computed with scikit-learn.

Data: the diabetes data bundled with scikit-learn (Efron, Hastie, Johnstone and Tibshirani,
"Least Angle Regression", Annals of Statistics 32(2), 2004), unscaled (scaled=False), so the
fixture stays small and exact: 442 rows, 10 features, target = disease progression.

Writes tests/fixtures/ridge_diabetes.json with
  x, y                        the data (y also as a second target column y2 = log(y) * x_bmi)
  fits[]                      sklearn.linear_model.Ridge(alpha) coef_ / intercept_ on all rows
  cv[]                        per-fold held-out MSE of Ridge(alpha) under KFold(5) (unshuffled,
                              contiguous folds), as cross_val_score(scoring=neg MSE) reports
  relative                    one strength given relative to trace(Xc^T Xc)/M, its absolute alpha
  wide_fits[], wide_cv[]      the same on the first rows only, where rows < features (the dual,
                              kernel form of the solve)
Run with Debian's interpreter: /usr/bin/python3 tests/reference/make_ridge_reference.py
"""
import json
import os

import numpy as np
import sklearn
from sklearn.datasets import load_diabetes
from sklearn.linear_model import Ridge
from sklearn.model_selection import KFold, cross_val_score

HERE = os.path.dirname(os.path.abspath(__file__))
OUT = os.path.join(HERE, "..", "fixtures", "ridge_diabetes.json")


def fit(x, y, alpha):
    model = Ridge(alpha=alpha, solver="svd").fit(x, y)
    coef = np.atleast_2d(model.coef_)  # k x M
    return {"alpha": alpha, "coef": coef.tolist(),
            "intercept": np.atleast_1d(model.intercept_).tolist()}


def cv(x, y, alpha, folds):
    scores = cross_val_score(Ridge(alpha=alpha, solver="svd"), x, y, cv=KFold(n_splits=folds),
                             scoring="neg_mean_squared_error")
    return {"alpha": alpha, "folds": folds, "fold_mse": (-scores).tolist(),
            "mean_mse": float(-scores.mean())}


def main():
    data = load_diabetes(scaled=False)
    x = data.data.astype(np.float64)
    y = data.target.astype(np.float64)
    y2 = np.column_stack([y, np.log(y) * x[:, 2]])

    alphas = [1e-2, 1.0, 100.0, 1e4]
    xc = x - x.mean(axis=0)
    relative = 1e-3
    relative_alpha = relative * np.trace(xc.T @ xc) / x.shape[1]

    wide_x, wide_y = x[:8], y[:8]        # 8 rows < 10 features
    wide_cv_x, wide_cv_y = x[:12], y[:12]  # 3 folds: 8 training rows < 10 features

    out = {
        "source": "scikit-learn %s, sklearn.datasets.load_diabetes(scaled=False)" % sklearn.__version__,
        "x": x.tolist(),
        "y": y.tolist(),
        "y2_second_column": y2[:, 1].tolist(),
        "fits": [fit(x, y, a) for a in alphas],
        "fits_two_targets": [fit(x, y2, a) for a in (1.0, 100.0)],
        "cv": [cv(x, y, a, 5) for a in alphas],
        "relative": {"value": relative, "alpha": float(relative_alpha),
                     "fit": fit(x, y, float(relative_alpha))},
        "wide_fits": [fit(wide_x, wide_y, a) for a in (1e-2, 1.0, 100.0)],
        "wide_cv": [cv(wide_cv_x, wide_cv_y, a, 3) for a in (1e-2, 1.0, 100.0)],
    }
    with open(OUT, "w") as f:
        json.dump(out, f, separators=(",", ":"))
        f.write("\n")


if __name__ == "__main__":
    main()
