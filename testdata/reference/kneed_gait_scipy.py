#!/usr/bin/env python3
"""Independent period-one passive gaits of kneed walkers.

Each walker (hip point mass, two legs of a thigh and a shank, arc or point
feet on the shanks, downhill slope) is derived by Lagrange's equations in SymPy
(derive() of kneed_sympy.py, which does not read the Go code) and
integrated with SciPy's DOP853 through the phases of a passive kneed step:

  1. just after a heel strike both knees are straight; the stance knee is
     latched, the trailing knee held by its stop alone, which would have to
     pull (its lock torque is negative: asserted), so it swings free;
  2. three-link phase: stance foot rolling, stance knee locked, swing knee
     free, until the swing knee reaches its stop (knee strike: a plastic
     impulse locking it, with the stance foot's no-slip rows);
  3. two-link phase: both knees locked, until the swing foot, ahead of the
     stance foot, touches the ground (a crossing behind it is a scuff and
     is ignored); heel strike: a plastic no-slip impulse on the new stance
     foot with both knees held, the old stance foot leaving the ground
     (its separation is asserted).

The fixed point of the map on the section just after heel strike, z =
(theta_stance, theta_swing, rates; knees straight), is found by Newton's
method with central differences; the eigenvalues of the map's Jacobian by
central differences. The lock torque is the negative of the knee row's
multiplier (the row is theta_shank - theta_thigh; a stop pushing against
hyperextension gives the shank a negative generalized force), positive
while the stop pushes. The ground's impulse on the stance foot at the
knee strike and on the new stance foot at the heel strike are the
multipliers of the contact rows of the impulse solves. Writes
testdata/reference/kneed_gait_scipy.json.

Run from the repository root: /usr/bin/python3 testdata/reference/kneed_gait_scipy.py
"""
import json
import os
import platform
import sys

import numpy as np
import scipy
import sympy as sp
from scipy.integrate import solve_ivp

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, HERE)
from kneed_sympy import derive  # noqa: E402

OUT = os.path.join(HERE, "kneed_gait_scipy.json")
RTOL = ATOL = 1e-12

# One walker of our own design: the thigh and shank of a 3 kg leg of
# 0.9 m, arc feet, 0.04 rad downhill. (No published kneed walker is
# compared: the one fixed point we could recall comes from a source the
# project does not use for its checks; this independent computation is
# the check.)
# The guesses are starting points for Newton only.
OURS = dict(length=0.45, mass=1.8, com_dist=0.2, inertia=0.03, foot_radius=0.27, arc_offset=0.01,
            shank=dict(length=0.45, mass=1.2, com_dist=0.25, inertia=0.02, actuated=False))
CASES = [
    ({"name": "passive_kneed", "hip_mass": 10.0, "gravity": 9.81, "slope": -0.04, "torso": None,
      "legs": [dict(OURS), dict(OURS)]}, [0.3356, -0.4474, -1.2978, -0.7425]),
]
SHANK = [4, 5]
F = {}
CASE = {}
SL = 0.0
T_HAT = None
N = 6


def use(case):
    """Derive the walker and make it the one the functions below use."""
    global F, CASE, SL, T_HAT, N
    exprs, _B, _Jk, N, q, qd = derive(case)
    F = {k: sp.lambdify([q, qd], v, modules="numpy") for k, v in exprs.items()}
    CASE = case
    SL = case["slope"]
    T_HAT = np.array([np.cos(SL), np.sin(SL)])


def arr(name, qq, vv):
    return np.array(F[name](qq, vv), dtype=float)


def knee_row(i):
    r = np.zeros(N)
    r[SHANK[i]], r[2 + i] = 1.0, -1.0
    return r


def constraint_rows(q_, v_, stance, locked):
    A = [arr(f"J{stance}", q_, v_)]
    b = [arr(f"jdot_v{stance}", q_, v_).ravel()]
    for i in locked:
        A.append(knee_row(i)[None, :])
        b.append(np.zeros(1))
    return np.vstack(A), np.concatenate(b)


def accel(q_, v_, stance, locked):
    """M a + h = A^T lam, A a + Adot v = 0; returns a, lam."""
    M = arr("M", q_, v_)
    h = arr("h", q_, v_).ravel()
    A, b = constraint_rows(q_, v_, stance, locked)
    k = A.shape[0]
    K = np.zeros((N + k, N + k))
    K[:N, :N], K[:N, N:], K[N:, :N] = M, -A.T, A
    sol = np.linalg.solve(K, np.concatenate([-h, -b]))
    return sol[:N], sol[N:]


def impulse(q_, v_, rows):
    """Plastic impulse: M (v+ - v-) = A^T Lam, A v+ = 0."""
    M = arr("M", q_, v_)
    A = np.vstack(rows)
    k = A.shape[0]
    K = np.zeros((N + k, N + k))
    K[:N, :N], K[:N, N:], K[N:, :N] = M, -A.T, A
    sol = np.linalg.solve(K, np.concatenate([M @ v_, np.zeros(k)]))
    return sol[:N], sol[N:]


def energy(q_, v_):
    return float(F["T"](q_, v_)) + float(F["V"](q_, v_))


def section_state(z, stance):
    """Both knees straight, stance foot touching at the origin's contact point, rolling."""
    sw = 1 - stance
    th = np.zeros(N)
    th[2 + stance], th[2 + sw] = z[0], z[1]
    th[SHANK[stance]], th[SHANK[sw]] = z[0], z[1]
    thd = np.zeros(N)
    thd[2 + stance], thd[2 + sw] = z[2], z[3]
    thd[SHANK[stance]], thd[SHANK[sw]] = z[2], z[3]
    R = CASE["legs"][stance]["foot_radius"]
    nrm = np.array([-np.sin(SL), np.cos(SL)])
    c0 = arr(f"centre{stance}", th, thd).ravel()
    want = R * nrm
    qq = th.copy()
    qq[0], qq[1] = want[0] - c0[0], want[1] - c0[1]
    J = arr(f"J{stance}", qq, thd)
    vh = np.linalg.solve(J[:, :2], -J[:, 2:] @ thd[2:])
    vv = thd.copy()
    vv[0], vv[1] = vh
    return qq, vv


def step(z, stance=0, watch_knee=False):
    """One step from the section; returns z after the heel strike and figures."""
    sw = 1 - stance
    q_, v_ = section_state(z, stance)
    e0 = energy(q_, v_)
    # The trailing knee held by its stop would have to pull: it swings free.
    _, lam = accel(q_, v_, stance, [stance, sw])
    trailing_torque = -lam[3]
    assert trailing_torque < 0, f"trailing knee lock torque {trailing_torque} >= 0: it would stay locked"
    min_knee = [np.inf]

    def watch(y, locked):
        a, lam = accel(y[:N], y[N:], stance, locked)
        min_knee[0] = min(min_knee[0], -lam[2])  # the stance knee's row follows the two contact rows

    def f(locked):
        def rhs(_t, y):
            a, _ = accel(y[:N], y[N:], stance, locked)
            return np.concatenate([y[N:], a])
        return rhs

    def knee_ev(_t, y):
        return y[SHANK[sw]] - y[2 + sw]
    knee_ev.terminal, knee_ev.direction = True, 1.0
    y0 = np.concatenate([q_, v_])
    sol = solve_ivp(f([stance]), (0, 5), y0, method="DOP853", rtol=RTOL, atol=ATOL, events=knee_ev, dense_output=True)
    assert sol.status == 1 and len(sol.t_events[0]) == 1, "no knee strike"
    tk = sol.t_events[0][0]
    for t in np.linspace(0, tk, 2001 if watch_knee else 0):
        watch(sol.sol(t), [stance])
    yk = sol.y_events[0][0]
    qk, vk = yk[:N], yk[N:]
    closing = vk[SHANK[sw]] - vk[2 + sw]
    ek0 = energy(qk, vk)
    vk2, lk = impulse(qk, vk, [arr(f"J{stance}", qk, vk), knee_row(stance)[None, :], knee_row(sw)[None, :]])
    assert lk[1] > 0, "the knee strike would need the ground to pull the stance foot"
    knee_lost = ek0 - energy(qk, vk2)
    # Two-link phase to the heel strike; a touchdown behind the stance foot is a scuff.

    def gap_ev(_t, y):
        return float(F[f"gap{sw}"](y[:N], y[N:]))
    gap_ev.terminal, gap_ev.direction = True, -1.0
    t, y = tk, np.concatenate([qk, vk2])
    scuffs = 0
    while True:
        sol = solve_ivp(f([stance, sw]), (t, t + 5), y, method="DOP853", rtol=RTOL, atol=ATOL, events=gap_ev,
                        dense_output=True)
        assert sol.status == 1, "no heel strike"
        th_ = sol.t_events[0][0]
        for tt in np.linspace(t, th_, 2001 if watch_knee else 0):
            watch(sol.sol(tt), [stance, sw])
        ye = sol.y_events[0][0]
        ahead = T_HAT @ (arr(f"centre{sw}", ye[:N], ye[N:]).ravel() - arr(f"centre{stance}", ye[:N], ye[N:]).ravel())
        if ahead > 0.1:
            break
        scuffs += 1
        t, y = th_, sol.sol(th_ + 1e-9)
        t += 1e-9
        assert scuffs < 5, "scuffing"
    qh, vh = ye[:N], ye[N:]
    eh0 = energy(qh, vh)
    vh2, lh = impulse(qh, vh, [arr(f"J{sw}", qh, vh), knee_row(stance)[None, :], knee_row(sw)[None, :]])
    heel_lost = eh0 - energy(qh, vh2)
    vn_old = (arr(f"J{stance}", qh, vh2) @ vh2)[1]
    assert vn_old > 0, f"the old stance foot does not leave the ground (normal velocity {vn_old})"
    c_old = arr(f"centre{stance}", q_, v_).ravel()
    c_new = arr(f"centre{sw}", qh, vh2).ravel()
    R = CASE["legs"][0]["foot_radius"]
    # Contact points: centre - R n; the step length along the slope.
    step_len = float(T_HAT @ (c_new - c_old))
    zn = np.array([qh[2 + sw], qh[2 + stance], vh2[2 + sw], vh2[2 + stance]])
    figs = dict(period=float(th_), knee_strike_time=float(tk), knee_closing_rate=float(closing),
                knee_energy_lost=float(knee_lost), knee_impulse=[float(lk[0]), float(lk[1])],
                knee_impulse_ratio=float(abs(lk[0]) / lk[1]), heel_impulse_ratio=float(abs(lh[0]) / lh[1]), heel_energy_lost=float(heel_lost), step_length=step_len,
                min_stance_knee_torque=float(min_knee[0]), trailing_knee_torque_at_start=float(trailing_torque),
                energy_change=float(energy(qh, vh2) - e0), scuffs=scuffs, foot_radius=R)
    return zn, figs


def fixed_point(z):
    z = np.array(z, dtype=float)
    for it in range(30):
        pz, _ = step(z)
        print(f"Newton {it}: residual {np.max(np.abs(pz - z)):.3g}", file=sys.stderr, flush=True)
        r = pz - z
        if np.max(np.abs(r)) < 1e-11:
            return z
        J = jac(z, 1e-6)
        z = z - np.linalg.solve(J - np.eye(4), r)
    raise RuntimeError("Newton did not converge")


def jac(z, h):
    J = np.zeros((4, 4))
    for j in range(4):
        e = np.zeros(4)
        e[j] = h * max(1.0, abs(z[j]))
        J[:, j] = (step(z + e)[0] - step(z - e)[0]) / (2 * e[j])
    return J


def evaluate(case, guess):
    use(case)
    z = fixed_point(guess)
    pz, figs = step(z, watch_knee=True)
    J = jac(z, 1e-4)
    J5 = jac(z, 1e-5)
    ev = sorted(np.linalg.eigvals(J), key=lambda c: (-abs(c), -c.imag))
    leg = case["legs"][0]
    m_total = case["hip_mass"] + 2 * (leg["mass"] + leg["shank"]["mass"])
    released = m_total * case["gravity"] * figs["step_length"] * np.sin(-SL)
    assert abs(figs["knee_energy_lost"] + figs["heel_energy_lost"] - released) < 1e-8 * released, "energy balance"
    return {
        "name": case["name"],
        "params": case,
        "fixed_point": [float(x) for x in z],
        "residual": float(np.max(np.abs(pz - z))),
        "eigenvalues": [[float(c.real), float(c.imag)] for c in ev],
        "jacobian_step_difference": float(np.max(np.abs(J - J5))),
        "potential_energy_released": float(released),
        **figs,
    }


def main():
    cases = [evaluate(c, g) for c, g in CASES]
    out = {
        "source": "SciPy DOP853 (rtol = atol = %g) integration of the kneed walker derived by Lagrange's equations in "
                  "SymPy (kneed_sympy.py derive()), independent of the Go code; Newton on the step-to-step map, "
                  "Jacobian by central differences (relative step 1e-4; jacobian_step_difference is the largest "
                  "change of an entry with step 1e-5)" % RTOL,
        "generator": "testdata/reference/kneed_gait_scipy.py",
        "regenerate": "/usr/bin/python3 testdata/reference/kneed_gait_scipy.py",
        "versions": {"python": platform.python_version(), "sympy": sp.__version__, "numpy": np.__version__,
                     "scipy": scipy.__version__},
        "conventions": "section just after heel strike, both knees straight (stance knee latched, trailing knee "
                       "held by its stop, which then releases it); z = (theta_stance, theta_swing, their rates), "
                       "absolute angles from the world vertical, rad and rad/s; times from the section, s; knee "
                       "torque N*m positive while the stop pushes; energies J; step length along the slope between "
                       "contact points, m",
        "cases": cases,
    }
    with open(OUT, "w") as fh:
        json.dump(out, fh, indent=1)
        fh.write("\n")
    for c in cases:
        print(json.dumps({k: c[k] for k in ("name", "fixed_point", "residual", "eigenvalues", "period", "step_length",
                                            "knee_strike_time", "knee_energy_lost", "heel_energy_lost",
                                            "potential_energy_released", "energy_change", "min_stance_knee_torque",
                                            "jacobian_step_difference")}))


if __name__ == "__main__":
    sys.exit(main())
