#!/usr/bin/python3
"""Passive steps of the compass walker with arc feet, integrated with SciPy.

Regenerate the fixture (from the repository root):

    /usr/bin/python3 testdata/reference/passive_step_scipy.py

writes testdata/reference/passive_step_scipy.json. Timing only (prints the
wall time of the integration, writes nothing):

    /usr/bin/python3 testdata/reference/passive_step_scipy.py --steps 10 --rtol 1e-9 --atol 1e-9

Needs Debian's python3-scipy, python3-numpy, python3-sympy. The equations of
motion come from the SymPy derivation in compass_sympy.py beside this file
(Lagrange's equations; independent of the Go code). The state is the full
floating-base state (q, v), q = (x_hip, y_hip, theta_left, theta_right);
the stance foot rolls, enforced at acceleration level (J q'' + Jdot q' = 0,
no stabilization), so the stance foot's gap and velocity drift only by the
integration error (recorded in the fixture). Heel strikes are located with
solve_ivp's event location on the swing foot's gap. The format of the JSON
file is described in README.md beside this script.
"""

import argparse
import importlib.util
import json
import math
import os
import sys
import time

import numpy as np
import scipy
from scipy.integrate import solve_ivp
from scipy.optimize import minimize_scalar, root

HERE = os.path.dirname(os.path.abspath(__file__))
OUT = os.path.join(HERE, "passive_step_scipy.json")
GENERATOR = "testdata/reference/passive_step_scipy.py"
REGENERATE = "/usr/bin/python3 testdata/reference/passive_step_scipy.py"

_spec = importlib.util.spec_from_file_location("compass_sympy", os.path.join(HERE, "compass_sympy.py"))
cs = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(cs)

# The walker of the fixture: realistic proportions of a small lab walker,
# arc feet of 0.3 L (the roll-over radius suggested for human feet), on a
# downhill slope steep enough for a passive gait.
PARAMS = {
    "hip_mass": 10.0,
    "legs": [dict(length=0.9, mass=3.0, com_dist=0.4, inertia=0.2,
                  foot_radius=0.27, arc_offset=0.01) for _ in range(2)],
    "gravity": 9.81,
    "slope": -0.04,
}
# Starting guesses of the two period-one gaits of this walker on this slope
# (reduced coordinates th_st, th_sw, w_st, w_sw just after heel strike),
# found by running scipy.optimize.root from a coarse grid of guesses.
STABLE_GUESS = [0.34, -0.45, -1.3, -0.68]
UNSTABLE_GUESS = [0.29, -0.40, -1.34, -0.90]
AHEAD_FRACTION = 0.1
TIGHT = 1e-12


class Walker:
    """Numerical compass walker built on the SymPy derivation."""

    def __init__(self, params):
        self.p = params
        self.pv = cs.params_vector(params)
        self.f = cs.model("math")
        s = params["slope"]
        self.t = np.array([math.cos(s), math.sin(s)])
        self.n = np.array([-math.sin(s), math.cos(s)])
        self.nfev = 0

    # --- kinematics and dynamics
    def M(self, q, v):
        return np.array(self.f["M"](self.pv, q, v))

    def h(self, q, v):
        return np.array(self.f["h"](self.pv, q, v)).ravel()

    def J(self, k, q, v):
        return np.array(self.f[f"J{k}"](self.pv, q, v))

    def jdot_v(self, k, q, v):
        return np.array(self.f[f"jdot_v{k}"](self.pv, q, v)).ravel()

    def gap(self, k, q):
        return self.f[f"gap{k}"](self.pv, q, [0.0] * 4)

    def ahead(self, k, q):
        """Position of foot k's contact point along the terrain tangent."""
        return self.f[f"ahead{k}"](self.pv, q, [0.0] * 4)

    def energy(self, q, v):
        return self.f["T"](self.pv, q, v) + self.f["V"](self.pv, q, v)

    def rolling(self, k, q, v, tau=0.0):
        """Accelerations and ground force (F_t, N) with foot k rolling."""
        M = self.M(q, v)
        J = self.J(k, q, v)
        K = np.zeros((6, 6))
        K[:4, :4] = M
        K[:4, 4:] = -J.T
        K[4:, :4] = J
        rhs = np.empty(6)
        rhs[:4] = np.array([0.0, 0.0, -tau, tau]) - self.h(q, v)
        rhs[4:] = -self.jdot_v(k, q, v)
        sol = np.linalg.solve(K, rhs)
        return sol[:4], sol[4:]

    def rhs(self, k):
        def f(_t, y):
            self.nfev += 1
            acc, _ = self.rolling(k, y[:4], y[4:])
            return np.concatenate((y[4:], acc))
        return f

    def impact(self, new, q, v):
        """Plastic no-slip impulse on foot `new`, the other foot released."""
        M = self.M(q, v)
        J2 = self.J(new, q, v)
        K = np.zeros((6, 6))
        K[:4, :4] = M
        K[:4, 4:] = -J2.T
        K[4:, :4] = J2
        rhs = np.zeros(6)
        rhs[4:] = -J2 @ v
        sol = np.linalg.solve(K, rhs)
        vplus = v + sol[:4]
        old = 1 - new
        sep = (self.J(old, q, vplus) @ vplus)[1]
        return vplus, sol[4:], sep

    # --- geometry for the momentum checks (written out here from the
    # conventions, not taken from the derivation, so it checks it)
    def bodies(self, q, v):
        """(mass, position, velocity, inertia, omega) of hip and legs."""
        out = [(self.p["hip_mass"], np.array(q[:2]), np.array(v[:2]), 0.0, 0.0)]
        for i in range(2):
            leg = self.p["legs"][i]
            th, w = q[2 + i], v[2 + i]
            e = np.array([math.sin(th), -math.cos(th)])
            ep = np.array([math.cos(th), math.sin(th)])
            c = leg["com_dist"]
            out.append((leg["mass"], np.array(q[:2]) + c * e, np.array(v[:2]) + c * w * ep, leg["inertia"], w))
        return out

    def angular_momentum(self, q, v, point, only=None):
        """Angular momentum (z) about a fixed point; `only` picks one body."""
        H = 0.0
        for j, (m, r, vel, I, w) in enumerate(self.bodies(q, v)):
            if only is not None and j != only:
                continue
            d = r - point
            H += m * (d[0] * vel[1] - d[1] * vel[0]) + I * w
        return H

    # --- states
    def post_impact_state(self, z, k=0):
        """Full state from reduced z = (th_st, th_sw, w_st, w_sw), stance foot k
        with its contact point at the origin and its material point at rest."""
        th = [0.0, 0.0]
        w = [0.0, 0.0]
        th[k], th[1 - k] = z[0], z[1]
        w[k], w[1 - k] = z[2], z[3]
        q0 = [0.0, 0.0, th[0], th[1]]
        c = np.array(self.f[f"contact{k}"](self.pv, q0, [0.0] * 4)).ravel()
        q = [-c[0], -c[1], th[0], th[1]]
        J = self.J(k, q, [0.0] * 4)
        vh = np.linalg.solve(J[:, :2], -J[:, 2:] @ np.array(w))
        return np.array(q), np.array([vh[0], vh[1], w[0], w[1]])

    def reduced(self, k, q, v):
        sw = 1 - k
        return np.array([q[2 + k], q[2 + sw], v[2 + k], v[2 + sw]])

    # --- one step
    def step(self, k, t0, q, v, rtol, atol, dense=False):
        """Integrate stance on foot k from (t0, q, v) to the heel strike of the
        other foot. Returns a dict with the event time, the state before, the
        scuff times and (dense) the solution pieces."""
        sw = 1 - k
        min_ahead = AHEAD_FRACTION * self.p["legs"][sw]["length"]
        fun = self.rhs(k)

        def ahead_ev(_t, y):
            return self.ahead(sw, y[:4]) - self.ahead(k, y[:4]) - min_ahead

        def gap_ev(_t, y):
            return self.gap(sw, y[:4])

        y = np.concatenate((q, v))
        t = t0
        armed = ahead_ev(t, y) > 0
        scuffs = []
        pieces = []
        for _ in range(100):
            if armed:
                e1 = lambda tt, yy: gap_ev(tt, yy)
                e1.terminal, e1.direction = True, -1
                e2 = lambda tt, yy: ahead_ev(tt, yy)
                e2.terminal, e2.direction = True, -1
                events = [e1, e2]
            else:
                e1 = lambda tt, yy: gap_ev(tt, yy)
                e1.terminal, e1.direction = False, -1
                e2 = lambda tt, yy: ahead_ev(tt, yy)
                e2.terminal, e2.direction = True, 1
                events = [e1, e2]
            sol = solve_ivp(fun, (t, t + 10.0), y, method="DOP853", rtol=rtol, atol=atol,
                            events=events, dense_output=dense)
            if sol.status != 1:
                raise RuntimeError(f"no heel strike within 10 s of t={t}: {sol.message}")
            if dense:
                pieces.append(sol)
            if armed:
                if len(sol.t_events[0]):
                    te = sol.t_events[0][0]
                    ye = sol.y_events[0][0]
                    return {"t": te, "q": ye[:4], "v": ye[4:], "scuffs": scuffs, "pieces": pieces}
                # The swing foot fell back behind the threshold: disarm.
                t, y, armed = sol.t_events[1][0], sol.y_events[1][0], False
            else:
                scuffs += list(sol.t_events[0])
                t, y, armed = sol.t_events[1][0], sol.y_events[1][0], True
        raise RuntimeError(f"stance on foot {k}: the swing foot crossed the {min_ahead} m "
                           "threshold ahead of the stance foot more than 100 times")

    def walk(self, k, t0, q, v, steps, rtol, atol):
        out = []
        for _ in range(steps):
            r = self.step(k, t0, q, v, rtol, atol)
            new = 1 - k
            vplus, lam, sep = self.impact(new, r["q"], r["v"])
            out.append({"heel_strike_time": r["t"], "stance_before": k,
                        "q_before": r["q"], "v_before": r["v"], "q": r["q"], "v": vplus,
                        "energy_lost": self.energy(r["q"], r["v"]) - self.energy(r["q"], vplus),
                        "impulse": lam, "separation": sep})
            k, t0, q, v = new, r["t"], r["q"], vplus
        return out


def step_map(w, z, rtol=TIGHT, atol=TIGHT):
    """Step-to-step map in reduced coordinates (stance foot relabelled)."""
    q, v = w.post_impact_state(z, 0)
    r = w.step(0, 0.0, q, v, rtol, atol)
    vplus, lam, sep = w.impact(1, r["q"], r["v"])
    return w.reduced(1, r["q"], vplus), r, vplus, lam, sep


def floats(a):
    return [float(x) for x in a]


def find_fixed_point(w, guess):
    sol = root(lambda z: step_map(w, z)[0] - z, guess, method="hybr", options={"xtol": 1e-13})
    if not sol.success:
        raise RuntimeError(f"fixed point: {sol.message}")
    z = sol.x
    res = np.max(np.abs(step_map(w, z)[0] - z))
    return z, res


def map_jacobian(w, z):
    """Central differences with two step sizes (Richardson extrapolation)."""
    def cd(hh):
        Jm = np.zeros((4, 4))
        for j in range(4):
            dz = np.zeros(4)
            dz[j] = hh
            Jm[:, j] = (step_map(w, z + dz)[0] - step_map(w, z - dz)[0]) / (2 * hh)
        return Jm
    J1, J2 = cd(2e-5), cd(1e-5)
    Jr = (4 * J2 - J1) / 3
    return Jr, np.max(np.abs(Jr - J2))


def stance_profile(w, k, pieces, t_end):
    """Max |F_t|/N, min N, energy drift and constraint drift along a stance."""
    ts, ys = [], []
    for sol in pieces:
        a, b = sol.t[0], min(sol.t[-1], t_end)
        tt = np.linspace(a, b, 2001)
        ts.append(tt)
        ys.append(sol.sol(tt))
    t = np.concatenate(ts)
    Y = np.concatenate(ys, axis=1)

    def ratio_at(y):
        _, lam = w.rolling(k, y[:4], y[4:])
        return abs(lam[0]) / lam[1], lam[1]

    vals = np.array([ratio_at(Y[:, i]) for i in range(Y.shape[1])])
    E = np.array([w.energy(Y[:4, i], Y[4:, i]) for i in range(Y.shape[1])])
    gaps = np.array([abs(w.gap(k, Y[:4, i])) for i in range(Y.shape[1])])
    vels = np.array([np.max(np.abs(w.J(k, Y[:4, i], Y[4:, i]) @ Y[4:, i])) for i in range(Y.shape[1])])
    swing_gaps = np.array([w.gap(1 - k, Y[:4, i]) for i in range(Y.shape[1])])
    below = t[swing_gaps < 0]

    def at(tq):
        for sol in pieces:
            if sol.t[0] <= tq <= sol.t[-1]:
                return sol.sol(tq)
        return pieces[-1].sol(tq)

    def refine(idx, f):
        lo, hi = t[max(idx - 1, 0)], t[min(idx + 1, len(t) - 1)]
        r = minimize_scalar(lambda tq: f(at(tq)), bounds=(lo, hi), method="bounded",
                            options={"xatol": 1e-10})
        return r.fun
    peak = -refine(int(np.argmax(vals[:, 0])), lambda y: -ratio_at(y)[0])
    nmin = refine(int(np.argmin(vals[:, 1])), lambda y: ratio_at(y)[1])
    return {"peak_friction_ratio": max(peak, float(vals[:, 0].max())),
            "min_normal_force": min(nmin, float(vals[:, 1].min())),
            "energy_drift": float(np.max(np.abs(E - E[0])) / abs(E[0])),
            "gap": float(gaps.max()), "velocity": float(vels.max()),
            "swing_min_gap": float(swing_gaps.min()),
            "swing_below_ground": [float(below.min()), float(below.max())] if len(below) else []}


def state(q, v):
    return {"q": floats(q), "v": floats(v)}


def timing_run(w, q0, v0, steps, rtol, atol, repeats):
    best = math.inf
    out = None
    for _ in range(repeats):
        w.nfev = 0
        t0 = time.perf_counter()
        out = w.walk(0, 0.0, q0, v0, steps, rtol, atol)
        best = min(best, time.perf_counter() - t0)
    return out, best, w.nfev


def initial_state(w, zstar):
    """A state near the fixed point: same angles (both feet on the ground),
    stance rate 2 % faster, swing rate +0.05 rad/s."""
    z = zstar.copy()
    z[2] *= 1.02
    z[3] += 0.05
    return w.post_impact_state(z, 0)


def fixed_point_record(w, guess):
    z, res = find_fixed_point(w, guess)
    zn, r, vplus, lam, sep = step_map(w, z)
    Jm, jerr = map_jacobian(w, z)
    ev = sorted(np.linalg.eigvals(Jm), key=lambda c: -abs(c))
    q, v = w.post_impact_state(z, 0)
    # Touch-down point to touch-down point (the stance foot rolls forward in
    # between, so its contact point at the heel strike is not the start one).
    step_length = w.ahead(1, r["q"]) - w.ahead(0, q)
    lost = w.energy(r["q"], r["v"]) - w.energy(r["q"], vplus)
    # A period-one gait repeats itself one step length down the slope, so the
    # heel strike must lose exactly the potential energy of that drop.
    mtot = w.p["hip_mass"] + sum(leg["mass"] for leg in w.p["legs"])
    drop = mtot * w.p["gravity"] * step_length * math.sin(-w.p["slope"])
    assert abs(lost - drop) < 1e-9 * drop, f"energy balance of the gait: lost {lost}, drop {drop}"
    return {
        "q": floats(q), "v": floats(v), "stance": 0,
        "reduced": {"stance_angle": float(z[0]), "swing_angle": float(z[1]),
                    "stance_rate": float(z[2]), "swing_rate": float(z[3])},
        "residual": float(res),
        "period": float(r["t"]),
        "step_length": float(step_length),
        "energy_lost": float(lost),
        "eigenvalues": [[float(c.real), float(c.imag)] for c in ev],
        "eigen_method": "Jacobian of the step-to-step map in the reduced coordinates by central differences "
                        "(steps 2e-5 and 1e-5, Richardson extrapolated) of maps integrated at rtol = atol = 1e-12; "
                        "estimated error %.1e (change of the Jacobian entries between the two steps)" % jerr,
        "stable": bool(max(abs(c) for c in ev) < 1),
    }


def check_impact(w, new, q, vminus, vplus, lam, sep):
    """Sanity checks of one heel strike; raise on failure."""
    old = 1 - new
    assert lam[1] > 0, f"impulse pulls: {lam}"
    assert sep >= 0, f"old stance foot would be pulled into the ground: {sep}"
    P = np.array(w.f[f"contact{new}"](w.pv, list(q), [0.0] * 4)).ravel()
    H0, H1 = w.angular_momentum(q, vminus, P), w.angular_momentum(q, vplus, P)
    assert abs(H1 - H0) < 1e-12 * (1 + abs(H0)), f"angular momentum about the contact: {H0} -> {H1}"
    hip = np.array(q[:2])
    # The released leg (old stance) gets no impulse but through the hip pin,
    # so its angular momentum about the hip point is conserved as well.
    L0 = w.angular_momentum(q, vminus, hip, only=1 + old)
    L1 = w.angular_momentum(q, vplus, hip, only=1 + old)
    assert abs(L1 - L0) < 1e-12 * (1 + abs(L0)), f"released leg about the hip: {L0} -> {L1}"
    assert np.max(np.abs(w.J(new, q, vplus) @ vplus)) < 1e-12, "new stance foot not at rest"
    return {"about_contact": [float(H0), float(H1)], "released_leg_about_hip": [float(L0), float(L1)]}


def main(argv):
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--steps", type=int, default=0, help="timing mode: number of passive steps")
    ap.add_argument("--rtol", type=float, default=1e-9)
    ap.add_argument("--atol", type=float, default=1e-9)
    ap.add_argument("--repeats", type=int, default=3)
    args = ap.parse_args(argv)
    w = Walker(PARAMS)
    zstar, _ = find_fixed_point(w, np.array(STABLE_GUESS))
    q0, v0 = initial_state(w, zstar)

    if args.steps:
        out, wall, nfev = timing_run(w, q0, v0, args.steps, args.rtol, args.atol, args.repeats)
        last = out[-1]
        print(f"{args.steps} passive steps, DOP853 rtol={args.rtol:g} atol={args.atol:g}: "
              f"wall time {wall:.4f} s (best of {args.repeats}), {nfev} right-hand-side evaluations per run")
        print(f"final t={last['heel_strike_time']!r} stance={1 - last['stance_before']}")
        print("final q", floats(last["q"]))
        print("final v", floats(last["v"]))
        return 0

    stable = fixed_point_record(w, STABLE_GUESS)
    unstable = fixed_point_record(w, UNSTABLE_GUESS)
    assert stable["stable"] and not unstable["stable"]

    # One step at tight tolerance, with the stance profile.
    r = w.step(0, 0.0, q0, v0, TIGHT, TIGHT, dense=True)
    vplus, lam, sep = w.impact(1, r["q"], r["v"])
    mom = check_impact(w, 1, r["q"], r["v"], vplus, lam, sep)
    prof = stance_profile(w, 0, r["pieces"], r["t"])
    assert prof["energy_drift"] < 1e-10, f"energy drift {prof['energy_drift']}"
    assert abs(w.gap(1, r["q"])) < 1e-12
    Eb, Ea = w.energy(r["q"], r["v"]), w.energy(r["q"], vplus)
    step = {
        "heel_strike_time": float(r["t"]),
        "before": state(r["q"], r["v"]),
        "after": state(r["q"], vplus),
        "stance_after": 1,
        "impulse": floats(lam),
        "impulse_ratio": float(abs(lam[0]) / lam[1]),
        "old_stance_separation_velocity": float(sep),
        "energy_before": float(Eb), "energy_after": float(Ea), "energy_lost": float(Eb - Ea),
        "scuff_times": floats(r["scuffs"]),
        "swing_min_gap": prof["swing_min_gap"],
        "swing_below_ground": prof["swing_below_ground"],
        "peak_friction_ratio": prof["peak_friction_ratio"],
        "min_normal_force": prof["min_normal_force"],
        "energy_drift": prof["energy_drift"],
        "constraint_drift": {"gap": prof["gap"], "velocity": prof["velocity"]},
        "angular_momentum": mom,
    }

    tight = w.walk(0, 0.0, q0, v0, 10, TIGHT, TIGHT)
    for s_ in tight:
        check_impact(w, 1 - s_["stance_before"], s_["q_before"], s_["v_before"], s_["v"], s_["impulse"], s_["separation"])
    assert abs(tight[0]["heel_strike_time"] - r["t"]) < 1e-12
    ten = {
        "rtol": TIGHT, "atol": TIGHT,
        "steps": [{"heel_strike_time": float(s_["heel_strike_time"]), "stance_before": s_["stance_before"],
                   "after": state(s_["q"], s_["v"]), "energy_lost": float(s_["energy_lost"])} for s_ in tight],
        "final": {"t": float(tight[-1]["heel_strike_time"]), "q": floats(tight[-1]["q"]),
                  "v": floats(tight[-1]["v"]), "stance": 1 - tight[-1]["stance_before"]},
    }

    out, wall, nfev = timing_run(w, q0, v0, 10, 1e-9, 1e-9, args.repeats)
    dev = max(np.max(np.abs(np.array(out[-1]["q"]) - np.array(tight[-1]["q"]))),
              np.max(np.abs(np.array(out[-1]["v"]) - np.array(tight[-1]["v"]))))
    timing = {"rtol": 1e-9, "atol": 1e-9, "steps": 10, "wall_time_s": wall, "repeats": args.repeats,
              "rhs_evaluations": nfev,
              "final": {"t": float(out[-1]["heel_strike_time"]), "q": floats(out[-1]["q"]),
                        "v": floats(out[-1]["v"]), "stance": 1 - out[-1]["stance_before"]},
              "max_deviation_from_tight": float(dev),
              "note": "wall time of time.perf_counter around 10 steps of solve_ivp (DOP853, event location) "
                      "with a Python right-hand side; machine dependent, information only"}

    doc = {
        "source": "scipy.integrate.solve_ivp (DOP853) with event location, equations of motion from the SymPy "
                  "Lagrange derivation in compass_sympy.py; fixed points by scipy.optimize.root (hybr); "
                  "independent of the Go code",
        "generator": GENERATOR,
        "regenerate": REGENERATE,
        "versions": cs.versions(),
        "conventions": cs.CONVENTIONS,
        "params": PARAMS,
        "integration": {"method": "DOP853", "rtol": TIGHT, "atol": TIGHT,
                        "coordinates": "full floating-base state (q, v); the stance foot rolls, enforced at "
                                       "acceleration level J q'' + Jdot q' = 0 with no stabilization"},
        "heel_strike_rule": {"min_ahead": AHEAD_FRACTION * PARAMS["legs"][0]["length"],
                             "rule": "the swing foot's gap crosses zero from positive to non-positive while the "
                                     "swing contact point is ahead of the stance contact point along t by more "
                                     "than min_ahead (0.1 L of the swing leg); earlier crossings are scuffs"},
        "fixed_point": stable,
        "other_fixed_points": [unstable],
        "initial": {"t": 0.0, "q": floats(q0), "v": floats(v0), "stance": 0,
                    "note": "the stable fixed point with the stance rate 2 % faster and the swing rate "
                            "0.05 rad/s higher; both feet on the ground"},
        "step": step,
        "ten_steps": ten,
        "timing": timing,
    }
    with open(OUT, "w") as fh:
        json.dump(doc, fh, indent=1)
        fh.write("\n")
    print(f"wrote {os.path.relpath(OUT)}")
    print(f"stable gait: z* = {stable['reduced']}, period {stable['period']:.6f} s, "
          f"eigenvalues {stable['eigenvalues']}")
    print(f"unstable gait: z* = {unstable['reduced']}, eigenvalues {unstable['eigenvalues']}")
    print(f"step: heel strike at t = {step['heel_strike_time']!r} s, energy lost {step['energy_lost']:.6g} J, "
          f"energy drift {step['energy_drift']:.2e}, peak |F_t|/N {step['peak_friction_ratio']:.4f}, "
          f"min N {step['min_normal_force']:.3f} N, impulse ratio {step['impulse_ratio']:.4f}")
    print(f"10 steps at 1e-9: wall time {wall:.4f} s (best of {args.repeats}), {nfev} rhs evaluations, "
          f"max deviation from 1e-12 run {dev:.2e}")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
