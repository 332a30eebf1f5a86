"""Reference values for the lot tests from scipy: binomial and hypergeometric CDFs and sample
statistics, and an exact-ratio hypergeometric CDF for lots beyond scipy's accurate range. Reads a JSON request file (argv[1]) and prints the answers as JSON on stdout."""
import json
import sys
from decimal import Decimal, getcontext

import numpy
import scipy
from scipy import stats


def hypergeom_cdf_exact(c, lot, defectives, n):
    """P(X <= c) from the exact ratio of successive hypergeometric terms, in 50-digit decimal
    arithmetic, normalised by the sum over the support: no factorial is ever formed."""
    getcontext().prec = 50
    low, high = max(0, n - (lot - defectives)), min(n, defectives)
    mode = min(high, max(low, (n + 1) * (defectives + 1) // (lot + 2)))
    weights = {mode: Decimal(1)}
    tiny = Decimal(10) ** -45
    k = mode
    while k < high and weights[k] > tiny:
        weights[k + 1] = weights[k] * Decimal((defectives - k) * (n - k)) / Decimal(
            (k + 1) * (lot - defectives - n + k + 1))
        k += 1
    k = mode
    while k > low and weights[k] > tiny:
        weights[k - 1] = weights[k] * Decimal(k * (lot - defectives - n + k)) / Decimal(
            (defectives - k + 1) * (n - k + 1))
        k -= 1
    total = sum(weights.values())
    return float(sum(w for j, w in weights.items() if j <= c) / total)


def main():
    with open(sys.argv[1], encoding="utf-8") as f:
        request = json.load(f)
    out = {"scipy": scipy.__version__, "binom": [], "hypergeom": [], "hypergeom_exact": [],
           "summary": []}
    for case in request.get("binom", []):
        out["binom"].append(float(stats.binom.cdf(case["c"], case["n"], case["p"])))
    for case in request.get("hypergeom", []):
        # scipy's hypergeom(M, n, N): M = lot size, n = defectives in the lot, N = sample size.
        out["hypergeom"].append(
            float(stats.hypergeom.cdf(case["c"], case["lot"], case["defectives"], case["n"])))
    for case in request.get("hypergeom_exact", []):
        out["hypergeom_exact"].append(
            hypergeom_cdf_exact(case["c"], case["lot"], case["defectives"], case["n"]))
    for values in request.get("summary", []):
        a = numpy.asarray(values, dtype=float)
        out["summary"].append({"mean": float(a.mean()), "sd": float(a.std(ddof=1)),
                               "min": float(a.min()), "max": float(a.max())})
    json.dump(out, sys.stdout)


if __name__ == "__main__":
    main()
