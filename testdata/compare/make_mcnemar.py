#!/usr/bin/python3
"""Reference p-values for McNemar's exact test (McNemar, Psychometrika 12
(1947) 153-157) in its exact binomial form: the two-sided binomial test of
b successes in n = b + c discordant pairs at probability 1/2, computed by
SciPy (Debian python3-scipy), scipy.stats.binomtest(b, b + c, 0.5).pvalue.

Run from the repository root: /usr/bin/python3 testdata/compare/make_mcnemar.py
It rewrites testdata/compare/mcnemar_scipy.json, which
viz/analysis/compare_test.go reads.
"""
import json
import scipy
from scipy.stats import binomtest

CASES = [(0, 1), (1, 0), (0, 5), (1, 4), (2, 3), (3, 3), (1, 9), (7, 2), (0, 12),
         (5, 15), (12, 30), (40, 60), (100, 130), (250, 300), (1000, 1100), (3, 0), (10, 11), (35, 7), (49, 9)]
rows = []
for b, c in CASES:
    n = b + c
    rows.append({"b": b, "c": c, "p": binomtest(b, n, 0.5, alternative="two-sided").pvalue})
out = {"source": "scipy.stats.binomtest(b, b+c, 0.5).pvalue, SciPy " + scipy.__version__ +
       " (Debian python3-scipy); McNemar, Psychometrika 12 (1947) 153-157",
       "cases": rows}
with open("testdata/compare/mcnemar_scipy.json", "w") as f:
    json.dump(out, f, indent=1)
    f.write("\n")
