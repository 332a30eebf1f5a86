#!/usr/bin/python3
"""Fits ampbench's circuit model with scipy.optimize.least_squares, as an independent reference.

Reads a JSON problem from the file named on the command line: the netlist as fit/circuit builds
it (node numbers, resistors, capacitors, sources, transistors with their SPICE parameters, the
generator and the probe nodes), the fit parameters (which part or transistor parameter each one
moves, its nominal value, free or a Gaussian prior on ln(value)), the gain points with their
standard deviations, optional DC readings of nodes, the start point and the tolerances.
Prints JSON: the fitted parameters, the sum of squares, nfev and the time spent in least_squares.

Written here from the equations, not by calling ampbench:
- DC operating point: modified nodal analysis, Newton-Raphson with SPICE's junction limiting,
  the transistor by the Gummel-Poon subset of fit/circuit/bjt.h (Ebers-Moll transport with
  base-width modulation q_b = 1/(1 - V_BC/VAF), GMIN across each junction).
- AC: the hybrid-pi linearisation at that point (g_m, g_pi, g_mu, g_o from the current
  derivatives; C_pi = C_je(V_BE) + TF*g_m/q_b, the TF transcapacitance, C_mu = C_jc(V_BC)),
  solved as complex MNA (G + jwC)x = b for the generator's 1 V behind its resistance.
- Residuals: (20 log10|H| - gain_db)/sd_db, wrap(arg H - phase)/sd_deg, one row
  (ln p - ln p0)/sd_ln per prior, one row (V_node - reading)/sd per DC reading; the parameters
  are worked in ln(value).
"""
import json
import math
import sys
import time

import numpy as np
from scipy.optimize import least_squares

GMIN = 1e-12


def diode(v, i_s, n_vt):
    """I_S(e^{v/nVt} - 1) and its slope, with SPICE's cubic form below -3 nVt."""
    if v >= -3 * n_vt:
        e = math.exp(v / n_vt)
        return i_s * (e - 1), i_s * e / n_vt
    arg = 3 * n_vt / (v * math.e)
    arg = arg * arg * arg
    return -i_s * (1 + arg), i_s * 3 * arg / v


def depletion(v, cj0, vj, m, fc):
    """Junction depletion capacitance C_j0/(1 - V/VJ)^M, continued linearly above FC*VJ."""
    if cj0 <= 0:
        return 0.0
    if v < fc * vj:
        return cj0 * (1 - v / vj) ** (-m)
    f2 = (1 - fc) ** (1 + m)
    f3 = 1 - fc * (1 + m)
    return cj0 / f2 * (f3 + m * v / vj)


def bjt(t, vbe, vbc, vt):
    """Currents, conductances and capacitances at (vbe, vbc), npn sense."""
    ibe, gbe = diode(vbe, t["is"], t["nf"] * vt)
    ibc, gbc = diode(vbc, t["is"], t["nr"] * vt)
    inv_vaf = 1.0 / t["vaf"] if t["vaf"] > 0 else 0.0
    qb = 1.0 / (1.0 - vbc * inv_vaf)
    dqb = qb * qb * inv_vaf
    transport = (ibe - ibc) / qb
    ev = {
        "ic": transport - ibc / t["br"] - GMIN * vbc,
        "ib": ibe / t["bf"] + GMIN * vbe + ibc / t["br"] + GMIN * vbc,
        "dic_dvbe": gbe / qb,
        "dic_dvbc": -gbc / qb - transport / qb * dqb - gbc / t["br"] - GMIN,
        "dib_dvbe": gbe / t["bf"] + GMIN,
        "dib_dvbc": gbc / t["br"] + GMIN,
        "cpi": depletion(vbe, t["cje"], t["vje"], t["mje"], t["fc"]),
        "ct": 0.0,
        "cmu": depletion(vbc, t["cjc"], t["vjc"], t["mjc"], t["fc"]),
    }
    if t["tf"] > 0 and vbe > 0:
        ev["cpi"] += t["tf"] * gbe / qb
        ev["ct"] = -t["tf"] * ibe / (qb * qb) * dqb
    return ev


def limit_junction(v_new, v_old, n_vt, v_crit):
    """SPICE's pnjlim: keeps a Newton step of a junction voltage inside exp()'s range."""
    if v_new > v_crit and abs(v_new - v_old) > 2 * n_vt:
        if v_old > 0:
            arg = 1 + (v_new - v_old) / n_vt
            return (v_old + n_vt * math.log(arg) if arg > 0 else v_crit), True
        return n_vt * math.log(v_new / n_vt), True
    if v_new < 0:
        floor_v = -v_old - 1 if v_old > 0 else 2 * v_old - 1
        if v_new < floor_v:
            return floor_v, True
    return v_new, False


class Circuit:
    def __init__(self, prob):
        self.prob = prob
        self.nodes = prob["node_count"] - 1
        self.n = prob["unknown_count"]
        self.vt = prob["vt"]
        self.params = prob["params"]
        self.x = None  # last operating point: the next Newton start

    def values(self, p):
        """Element values and transistor parameters with the fit parameters applied."""
        by_part = {}
        tp = {}
        for j, par in enumerate(self.params):
            if par["target"] == "value":
                by_part[par["part"]] = p[j]
            else:
                tp[(par["transistor"], par["target"])] = p[j]
        res = [(a, b, by_part.get(part, ohms)) for a, b, ohms, part in self.prob["resistors"]]
        caps = [(a, b, by_part.get(part, f)) for a, b, f, part in self.prob["capacitors"]]
        vsrc = [(pl, mi, by_part.get(part, v), br) for pl, mi, v, part, br in self.prob["vsources"]]
        isrc = [(fr, to, by_part.get(part, a)) for fr, to, a, part in self.prob["isources"]]
        trans = []
        for k, t in enumerate(self.prob["transistors"]):
            t = dict(t)
            t["bf"] = by_part.get(t["part"], t["bf"])
            for name in ("is", "rb", "vaf", "tf", "cje", "cjc"):
                if (k, name) in tp:
                    t[name] = tp[(k, name)]
            trans.append(t)
        return res, caps, vsrc, isrc, trans

    def linear_g(self, res, vsrc, trans):
        g = np.zeros((self.n, self.n))

        def cond(a, b, v):
            if a:
                g[a - 1, a - 1] += v
            if b:
                g[b - 1, b - 1] += v
            if a and b:
                g[a - 1, b - 1] -= v
                g[b - 1, a - 1] -= v

        for a, b, ohms in res:
            cond(a, b, 1.0 / ohms)
        cond(self.prob["stimulus"], 0, 1.0 / self.prob["generator_ohms"])
        for t in trans:
            if t["bi"] != t["b"]:
                cond(t["b"], t["bi"], 1.0 / t["rb"])
        for pl, mi, _, br in vsrc:
            k = self.nodes + br
            if pl:
                g[pl - 1, k] += 1
                g[k, pl - 1] += 1
            if mi:
                g[mi - 1, k] -= 1
                g[k, mi - 1] -= 1
        return g

    @staticmethod
    def volt(x, node):
        return 0.0 if node == 0 else x[node - 1]

    def junctions(self, t, x):
        vb = self.volt(x, t["bi"])
        pol = t["polarity"]
        return pol * (vb - self.volt(x, t["e"])), pol * (vb - self.volt(x, t["c"]))

    @staticmethod
    def stamp_device(a, t, ev, cols=None):
        """The transistor's conductances (or, with cols, its capacitances) at rows c, b', e."""
        c, bi, e = t["c"], t["bi"], t["e"]

        def at(r, col, v):
            if r and col:
                a[r - 1, col - 1] += v

        if cols is None:
            gcb = ev["dic_dvbe"] + ev["dic_dvbc"]
            gcc, gce = -ev["dic_dvbc"], -ev["dic_dvbe"]
            gbb = ev["dib_dvbe"] + ev["dib_dvbc"]
            gbc, gbe = -ev["dib_dvbc"], -ev["dib_dvbe"]
            at(c, bi, gcb); at(c, c, gcc); at(c, e, gce)
            at(bi, bi, gbb); at(bi, c, gbc); at(bi, e, gbe)
            at(e, bi, -(gcb + gbb)); at(e, c, -(gcc + gbc)); at(e, e, -(gce + gbe))
        else:
            cpi, ct, cmu = ev["cpi"], ev["ct"], ev["cmu"]
            at(bi, bi, cpi + ct + cmu); at(bi, e, -cpi); at(bi, c, -ct - cmu)
            at(e, bi, -cpi - ct); at(e, e, cpi); at(e, c, ct)
            at(c, bi, -cmu); at(c, c, cmu)

    def newton(self, g_lin, b_lin, trans, x, first):
        """Newton from x; first: start the junctions at their critical voltages (SPICE)."""
        vt = self.vt
        vcrit = [t["nf"] * vt * math.log(t["nf"] * vt / (math.sqrt(2) * t["is"])) for t in trans]
        vcrit_r = [t["nr"] * vt * math.log(t["nr"] * vt / (math.sqrt(2) * t["is"])) for t in trans]
        junction = [(vcrit[k], 0.0) if first else self.junctions(t, x) for k, t in enumerate(trans)]
        for it in range(150):
            a = g_lin.copy()
            rhs = b_lin.copy()
            limited = False
            for k, t in enumerate(trans):
                if first:
                    vbe, vbc = junction[k]
                    limited = True
                else:
                    vbe, vbc = self.junctions(t, x)
                    vbe, l1 = limit_junction(vbe, junction[k][0], t["nf"] * vt, vcrit[k])
                    vbc, l2 = limit_junction(vbc, junction[k][1], t["nr"] * vt, vcrit_r[k])
                    limited = limited or l1 or l2
                junction[k] = (vbe, vbc)
                ev = bjt(t, vbe, vbc, vt)
                pol = t["polarity"]
                self.stamp_device(a, t, ev)
                ic_eq = pol * ev["ic"] - (ev["dic_dvbe"] * pol * vbe + ev["dic_dvbc"] * pol * vbc)
                ib_eq = pol * ev["ib"] - (ev["dib_dvbe"] * pol * vbe + ev["dib_dvbc"] * pol * vbc)
                for node, amps in ((t["c"], -ic_eq), (t["bi"], -ib_eq), (t["e"], ic_eq + ib_eq)):
                    if node:
                        rhs[node - 1] += amps
            first = False
            x_new = np.linalg.solve(a, rhs)
            step = np.max(np.abs(x_new[:self.nodes] - x[:self.nodes]))
            if step > 5.0:  # damping: no node moves more than 5 V in one step
                x_new = x + 5.0 / step * (x_new - x)
                limited = True
            tol = 1e-12 * np.maximum(np.abs(x_new), np.abs(x))
            tol[:self.nodes] += 1e-9
            tol[self.nodes:] += 1e-15
            done = not limited and it > 0 and np.all(np.abs(x_new - x) <= tol)
            x = x_new
            if done:
                return x
        return None

    def set(self, p):
        res, caps, vsrc, isrc, trans = self.values(p)
        g_lin = self.linear_g(res, vsrc, trans)
        b_lin = np.zeros(self.n)
        for pl, mi, volts, br in vsrc:
            b_lin[self.nodes + br] += volts
        for fr, to, amps in isrc:
            if fr:
                b_lin[fr - 1] -= amps
            if to:
                b_lin[to - 1] += amps
        x = None
        if self.x is not None:
            x = self.newton(g_lin, b_lin, trans, self.x.copy(), False)
        if x is None:
            x = self.newton(g_lin, b_lin, trans, np.zeros(self.n), True)
        if x is None:
            return False
        self.x = x
        # Small-signal matrices at the operating point.
        g = g_lin
        c = np.zeros((self.n, self.n))
        for a, b, farads in caps:
            for r, col, s in ((a, a, 1), (b, b, 1), (a, b, -1), (b, a, -1)):
                if r and col:
                    c[r - 1, col - 1] += s * farads
        for t in trans:
            vbe, vbc = self.junctions(t, x)
            ev = bjt(t, vbe, vbc, self.vt)
            self.stamp_device(g, t, ev)
            self.stamp_device(c, t, ev, cols=True)
        self.g, self.c = g, c
        return True

    def gain(self, freq_hz):
        """V(out)/V(in) at every frequency, by one batched complex solve."""
        w = 2 * np.pi * np.asarray(freq_hz)
        a = self.g[None, :, :] + 1j * w[:, None, None] * self.c[None, :, :]
        b = np.zeros(self.n, dtype=complex)
        st = self.prob["stimulus"]
        b[st - 1] = 1.0 / self.prob["generator_ohms"]
        x = np.linalg.solve(a, np.broadcast_to(b, (len(w), self.n))[:, :, None])[:, :, 0]
        vin = x[:, self.prob["in"] - 1] if self.prob["in"] else 0
        vout = x[:, self.prob["out"] - 1] if self.prob["out"] else 0
        return vout / vin


def main():
    with open(sys.argv[1]) as fh:
        prob = json.load(fh)
    f = np.array(prob["freq_hz"], dtype=float)
    gain = np.array(prob["gain_db"], dtype=float)
    phase = np.array(prob["phase_deg"], dtype=float)
    gsd = np.array(prob["gain_db_sd"], dtype=float)
    psd = np.array(prob["phase_deg_sd"], dtype=float)
    has_phase = bool(prob.get("has_phase", True))
    params = prob["params"]
    prior = [j for j, par in enumerate(params) if not par["free"]]
    ln_nominal = np.log([params[j]["nominal"] for j in prior])
    prior_sd = np.array([params[j]["prior_sd_ln"] for j in prior])
    dc = prob.get("dc_readings", [])
    dc_node = [d["node"] for d in dc]
    dc_volts = np.array([d["volts"] for d in dc])
    dc_sd = np.array([d["sd_volts"] for d in dc])
    circuit = Circuit(prob)
    rows = len(f) * (2 if has_phase else 1) + len(prior) + len(dc)

    def residuals(u):
        p = np.exp(u)
        if not circuit.set(p):
            return np.full(rows, 1e50)
        h = circuit.gain(f)
        out = [(20 * np.log10(np.abs(h)) - gain) / gsd]
        if has_phase:
            d = np.degrees(np.angle(h)) - phase
            out.append((d - 360.0 * np.round(d / 360.0)) / psd)
        out.append((u[prior] - ln_nominal) / prior_sd)
        if dc:
            out.append((np.array([circuit.volt(circuit.x, n) for n in dc_node]) - dc_volts) / dc_sd)
        return np.concatenate(out)

    def jacobian(u):
        # Central differences in ln p with h = 1e-5, the scheme fit/response/circuit_fit.cpp
        # uses, so both sides run MINPACK's lmder on the same derivatives.
        h = 1e-5
        cols = []
        for j in range(len(u)):
            up = u.copy()
            up[j] += h
            down = u.copy()
            down[j] -= h
            cols.append((residuals(up) - residuals(down)) / (2 * h))
        residuals(u)  # leave the operating point at u, the next Newton start
        return np.column_stack(cols)

    u0 = np.log(np.array(prob["start"], dtype=float))
    repeats = int(prob.get("repeats", 1))
    times = []
    for _ in range(repeats):
        circuit.x = None  # every repeat starts cold, as each ampbench fit does
        t0 = time.perf_counter()
        res = least_squares(residuals, u0, jac=jacobian, method="lm", ftol=prob["ftol"], xtol=prob["xtol"], gtol=1e-15,
                            x_scale="jac", max_nfev=prob.get("max_nfev", 4000))
        times.append(time.perf_counter() - t0)
    # The fastest repeat: on a shared machine the others carry other processes' time.
    elapsed = min(times)
    print(json.dumps({"params": [float(v) for v in np.exp(res.x)], "names": [par["name"] for par in params],
                      "cost": float(2 * res.cost), "status": int(res.status), "nfev": int(res.nfev),
                      "njev": int(res.njev) if res.njev is not None else 0,
                      "fit_seconds": elapsed}))


if __name__ == "__main__":
    main()
