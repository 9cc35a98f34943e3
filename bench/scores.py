"""Benchmark: verification scores on a full sheet column (1,048,575 rows) against the reference
libraries doing the same job, measured in the same run.

Run:  python bench/scores.py [ROWS]

For each task it prints our time, the reference's time and the ratio reference / ours (above 1:
we are faster). References: scikit-learn's metric functions (one call per score, as an analyst
would write them) and statsmodels' diebold_mariano_test. Not a timed test: figures depend on the
machine.
"""
from __future__ import annotations

import sys
import warnings
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
sys.path.insert(0, str(Path(__file__).resolve().parent))

from _timing import best_of  # noqa: E402

from sheetfns import scores  # noqa: E402


def sklearn_categorical(actual: np.ndarray, forecast: np.ndarray) -> dict[str, float]:
    from sklearn import metrics as m

    y, f = actual.astype(int), forecast.astype(int)
    return {
        "confusion": m.confusion_matrix(y, f),
        "accuracy": m.accuracy_score(y, f),
        "sensitivity": m.recall_score(y, f),
        "specificity": m.recall_score(y, f, pos_label=0),
        "precision": m.precision_score(y, f),
        "f1": m.f1_score(y, f),
        "balanced_accuracy": m.balanced_accuracy_score(y, f),
        "matthews": m.matthews_corrcoef(y, f),
        "heidke_skill": m.cohen_kappa_score(y, f),
        "critical_success_index": m.jaccard_score(y, f),
    }


def sklearn_probabilistic(actual: np.ndarray, prob: np.ndarray) -> dict[str, float]:
    from sklearn import metrics as m

    return {"brier": m.brier_score_loss(actual, prob), "log_loss": m.log_loss(actual, prob),
            "roc_auc": m.roc_auc_score(actual, prob)}


def main(argv: list[str] | None = None) -> int:
    args = sys.argv[1:] if argv is None else argv
    n = int(args[0]) if args else 1_048_575
    rng = np.random.default_rng(2024)
    actual = (rng.random(n) < 0.3).astype(float)
    forecast = np.where(rng.random(n) < 0.8, actual, 1.0 - actual)
    prob = np.clip(0.3 + 0.3 * (actual - 0.3) + rng.normal(0, 0.2, n), 0, 1)
    prob_b = np.clip(prob + rng.normal(0, 0.05, n), 0, 1)
    from statsmodels.tsa.stattools import diebold_mariano_test

    tasks = [
        ("categorical: 23 keys vs sklearn's 10 metric calls",
         lambda: scores.categorical(actual, forecast), lambda: sklearn_categorical(actual, forecast)),
        ("brier + log loss + ROC area (+ decomposition) vs sklearn's three",
         lambda: scores.probabilistic(actual, prob), lambda: sklearn_probabilistic(actual, prob)),
        ("ROC points vs sklearn roc_curve(drop_intermediate=False)",
         lambda: scores.roc_points(actual, prob),
         lambda: __import__("sklearn.metrics").metrics.roc_curve(actual, prob,
                                                                  drop_intermediate=False)),
        ("Diebold-Mariano h=1 vs statsmodels diebold_mariano_test(lags=0)",
         lambda: scores.diebold_mariano(actual, prob, prob_b),
         lambda: diebold_mariano_test(actual, prob, prob_b, lags=0, harvey_adj=True)),
        ("Diebold-Mariano h=3 vs statsmodels diebold_mariano_test(lags=2)",
         lambda: scores.diebold_mariano(actual, prob, prob_b, horizon=3),
         lambda: diebold_mariano_test(actual, prob, prob_b, lags=2, harvey_adj=True, horizon=3)),
    ]
    print(f"rows: {n:,}")
    print(f"{'task':68s} {'ours s':>8s} {'ref s':>8s} {'ref/ours':>9s}")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for name, ours, ref in tasks:
            ours(), ref()  # warm up imports
            t_ours, t_ref = best_of(ours), best_of(ref)
            print(f"{name:68s} {t_ours:8.3f} {t_ref:8.3f} {t_ref / t_ours:9.1f}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
