#!/usr/bin/python3
"""Fits the ampbench rational transfer-function model with scipy.optimize.least_squares.

Reads a JSON problem (data, order, sign, start) from the file named on the command line and
prints JSON: the fitted parameters, the cost and the time spent inside least_squares.
The model and residuals are written here from the definition in fit/response/rational_model.h:
H(f) = sign * 10^(g/20) * prod_low (jf + z)/(jf + p) * prod_high 1/(1 + jf/p)
       * prod_pairs 1/(1 - (f/f0)^2 + j f/(f0 Q)),
residuals (20 log10|H| - gain_db)/gain_sd and wrap(arg H - phase)/phase_sd in degrees.
"""
import json
import sys
import time

import numpy as np
from scipy.optimize import least_squares


def log_response(x, order, sign, f):
    jf = 1j * f
    g = x[0]
    p = np.exp(x[1:])
    ln_h = np.full(f.shape, g / (20 / np.log(10)), dtype=complex)
    if sign < 0:
        ln_h += 1j * np.pi
    lp, lz, hp, cp = order["low_poles"], order["low_zeros"], order["high_poles"], order["complex_pairs"]
    poles = p[:lp]
    zeros = p[lp:lp + lz]
    origin = lp - lz
    for i in range(lp):
        num = jf if i < origin else jf + zeros[i - origin]
        ln_h += np.log(num / (jf + poles[i]))
    k = lp + lz
    for i in range(hp):
        ln_h -= np.log(1 + jf / p[k])
        k += 1
    for i in range(cp):
        u = f / p[k]
        q = p[k + 1]
        ln_h -= np.log(1 - u * u + 1j * u / q)
        k += 2
    return ln_h


def main():
    with open(sys.argv[1]) as fh:
        prob = json.load(fh)
    f = np.array(prob["freq_hz"], dtype=float)
    gain = np.array(prob["gain_db"], dtype=float)
    phase = np.array(prob["phase_deg"], dtype=float)
    gsd = np.array(prob["gain_db_sd"], dtype=float)
    psd = np.array(prob["phase_deg_sd"], dtype=float)
    order = prob["order"]
    sign = prob["sign"]
    start = np.array(prob["start"], dtype=float)
    x0 = np.concatenate([[start[0]], np.log(start[1:])])

    def residuals(x):
        ln_h = log_response(x, order, sign, f)
        r_mag = (ln_h.real * 20 / np.log(10) - gain) / gsd
        d = np.degrees(ln_h.imag) - phase
        r_ph = (d - 360.0 * np.round(d / 360.0)) / psd
        return np.concatenate([r_mag, r_ph])

    repeats = int(prob.get("repeats", 1))
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        res = least_squares(residuals, x0, method="lm", xtol=1e-15, ftol=1e-15, gtol=1e-15,
                            x_scale="jac", max_nfev=100000)
        times.append(time.perf_counter() - t0)
    elapsed = sum(times) / repeats
    fastest = min(times)
    params = [float(res.x[0])] + [float(v) for v in np.exp(res.x[1:])]
    print(json.dumps({"params": params, "cost": float(2 * res.cost), "status": int(res.status),
                      "nfev": int(res.nfev), "fit_seconds": elapsed,
                      "fit_seconds_min": fastest}))


if __name__ == "__main__":
    main()
