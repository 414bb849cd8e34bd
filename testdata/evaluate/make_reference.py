#!/usr/bin/python3
"""Writes reference.json: evaluation metrics computed by outside libraries, for
viz/analysis's evaluation tests to compare against.

Inputs (committed): assets/demo/demo.json, whose probe.predictions list the
class PyTorch predicted for every probe image under both demo checkpoints, and
the small literal cases below. Outputs: for each case, scikit-learn's
confusion_matrix, precision_recall_fscore_support (average=None,
zero_division=0) and accuracy_score; and for a few (successes, trials) pairs,
statsmodels' proportion_confint(method="wilson", alpha=0.05).

Debian packages: python3-sklearn, python3-statsmodels. Run from the
repository root:

    /usr/bin/python3 testdata/evaluate/make_reference.py
"""
import json
import os

import sklearn
import statsmodels
from sklearn.metrics import accuracy_score, confusion_matrix, precision_recall_fscore_support
from statsmodels.stats.proportion import proportion_confint

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))


def case(name, y_true, y_pred, n_classes, files=None):
    labels = list(range(n_classes))
    p, r, _, s = precision_recall_fscore_support(y_true, y_pred, labels=labels, average=None, zero_division=0)
    out = {
        "name": name,
        "classes": n_classes,
        "y_true": [int(v) for v in y_true],
        "y_pred": [int(v) for v in y_pred],
        "confusion_matrix": confusion_matrix(y_true, y_pred, labels=labels).tolist(),
        "precision": [float(v) for v in p],
        "recall": [float(v) for v in r],
        "support": [int(v) for v in s],
        "accuracy_score": float(accuracy_score(y_true, y_pred)),
    }
    if files is not None:
        out["files"] = files
    return out


def main():
    with open(os.path.join(ROOT, "assets", "demo", "demo.json")) as f:
        demo = json.load(f)
    preds = demo["probe"]["predictions"]
    files = [p["file"] for p in preds]
    y_true = [p["label"] for p in preds]
    cases = [
        case("demo probe, healthy (PyTorch predictions from demo.json)", y_true, [p["healthy"] for p in preds], 7, files),
        case("demo probe, unhealthy (PyTorch predictions from demo.json)", y_true, [p["unhealthy"] for p in preds], 7, files),
        # Hand-made: class 3 never predicted (precision 0 by zero_division=0),
        # class 4 never true (support 0, recall 0), class 0 always right.
        case("literal, a class never predicted and one never true", [0, 0, 1, 1, 1, 2, 3, 3, 2, 1],
             [0, 0, 1, 2, 4, 2, 1, 2, 2, 1], 5),
    ]
    pairs = [(256, 280), (216, 280), (81, 263), (0, 10), (10, 10), (1, 1), (5, 1000000), (999, 1000)]
    wilson = []
    for k, n in pairs:
        lo, hi = proportion_confint(k, n, alpha=0.05, method="wilson")
        wilson.append({"successes": k, "trials": n, "low": float(lo), "high": float(hi)})
    out = {
        "about": "Reference metrics for Fovea's evaluation tests. Written by testdata/evaluate/make_reference.py; do not edit by hand.",
        "sklearn": sklearn.__version__,
        "statsmodels": statsmodels.__version__,
        "cases": cases,
        "wilson": wilson,
    }
    path = os.path.join(ROOT, "testdata", "evaluate", "reference.json")
    with open(path, "w") as f:
        json.dump(out, f, indent=1)
        f.write("\n")
    print("wrote", path)


if __name__ == "__main__":
    main()
