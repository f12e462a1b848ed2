#!/usr/bin/env python3
"""Reference values for the kneed walker (a planar tree: hip point mass,
per leg a thigh and a shank joined by a knee or one straight link, an
optional torso, arc feet on the lowest link of each leg), derived by
Lagrange's equations in SymPy from the positions of the bodies. It does not
read or port the Go code. Writes testdata/reference/kneed_sympy.json.

Run from the repository root: /usr/bin/python3 testdata/reference/kneed_sympy.py
"""
import json
import os
import platform
import sys

import mpmath
import numpy
import sympy as sp

HERE = os.path.dirname(os.path.abspath(__file__))
OUT = os.path.join(HERE, "kneed_sympy.json")
GENERATOR = "testdata/reference/kneed_sympy.py"
REGENERATE = "/usr/bin/python3 testdata/reference/kneed_sympy.py"
DPS = 40
N_STATES = 12

CONVENTIONS = {
    "units": "SI: m, kg, kg*m^2, rad, s, N, N*m",
    "frame": "world x forward, y up, gravity -g*y",
    "coordinates": "q = (x_hip, y_hip, theta of leg or thigh left, right, [theta_torso], theta_shank of each kneed leg, left first); "
                   "absolute angles counter-clockwise from the world vertical",
    "axes": "link axis e(theta) = (sin theta, -cos theta) pointing down the leg (hip to knee, knee to foot); the torso's "
            "centre of mass is at hip - c*e(theta_torso); e_perp(theta) = (cos theta, sin theta)",
    "bodies": "hip point mass; thigh (or straight leg) COM at hip + c*e(theta_thigh); shank COM at knee + c_s*e(theta_shank), "
              "knee = hip + L_thigh*e(theta_thigh); inertias about each COM",
    "foot": "arc of radius R fixed to the leg's lowest link, centre at joint + (L - R)*e(theta) + d*e_perp(theta) "
            "(joint = knee for a kneed leg, hip for a straight one; L that link's length)",
    "terrain": "one straight line through the origin, slope s; t = (cos s, sin s), n = (-sin s, cos s)",
    "contact_jacobian": "rows (t.v_p, n.v_p), v_p = v_centre + omega_foot_link z x (-R n)",
    "input_matrix": "columns in joint order: hip (compass: +tau on the right leg, -tau on the left) or hip_left, hip_right "
                    "(+tau on the leg, -tau on the torso), then each actuated knee (+tau on the shank, -tau on the thigh)",
    "knee_constraint": "locked knee: row e_shank - e_thigh of a 1 x n Jacobian (knee angle rate), force along the same row",
    "dynamics": "M(q) qdd + h(q, qd) = B tau + J_c^T lambda + J_k^T mu",
}

LEG = dict(length=0.45, mass=4.0, com_dist=0.2, inertia=0.07, foot_radius=0.0, arc_offset=0.0)
SHANK = dict(length=0.45, mass=2.5, com_dist=0.18, inertia=0.04, actuated=False)

CASES = [
    {"name": "kneed", "seed": 12001, "hip_mass": 10.0, "gravity": 9.81, "slope": -0.03, "torso": None,
     "legs": [dict(LEG, foot_radius=0.12, arc_offset=0.01, shank=dict(SHANK)),
              dict(LEG, foot_radius=0.12, arc_offset=0.01, shank=dict(SHANK))]},
    {"name": "kneed_torso_actuated", "seed": 12002, "hip_mass": 8.0, "gravity": 9.81, "slope": 0.02,
     "torso": dict(mass=15.0, com_dist=0.3, inertia=0.6),
     "legs": [dict(LEG, foot_radius=0.2, arc_offset=-0.02, shank=dict(SHANK, actuated=True)),
              dict(LEG, mass=3.5, com_dist=0.22, foot_radius=0.15, arc_offset=0.0,
                   shank=dict(SHANK, length=0.5, mass=2.0, com_dist=0.25, actuated=True))]},
    {"name": "one_knee", "seed": 12003, "hip_mass": 12.0, "gravity": 9.81, "slope": 0.0, "torso": None,
     "legs": [dict(LEG, foot_radius=0.1, arc_offset=0.0, shank=dict(SHANK, actuated=True)),
              dict(LEG, length=0.9, mass=6.0, com_dist=0.4, inertia=0.3, foot_radius=0.25, arc_offset=0.01)]},
]


def layout(case):
    """Coordinate indices: thigh/leg i at 2+i, torso next, shanks after."""
    n = 4
    torso = None
    if case["torso"] is not None:
        torso = n
        n += 1
    shank = [None, None]
    for i, leg in enumerate(case["legs"]):
        if leg.get("shank"):
            shank[i] = n
            n += 1
    return n, torso, shank


def derive(case):
    n, torso, shank = layout(case)
    q = sp.symbols("q0:%d" % n, real=True)
    qd = sp.symbols("qd0:%d" % n, real=True)
    g = sp.Float(case["gravity"], 30)
    s = sp.Float(case["slope"], 30)
    F = lambda x: sp.Float(x, 30)  # noqa: E731
    e = lambda th: sp.Matrix([sp.sin(th), -sp.cos(th)])  # noqa: E731
    ep = lambda th: sp.Matrix([sp.cos(th), sp.sin(th)])  # noqa: E731
    hip = sp.Matrix([q[0], q[1]])
    bodies = [(F(case["hip_mass"]), hip, None, 0)]  # mass, position, angle index, inertia
    feet = []
    for i, leg in enumerate(case["legs"]):
        th = q[2 + i]
        bodies.append((F(leg["mass"]), hip + F(leg["com_dist"]) * e(th), 2 + i, F(leg["inertia"])))
        if shank[i] is not None:
            sh = leg["shank"]
            knee = hip + F(leg["length"]) * e(th)
            ths = q[shank[i]]
            bodies.append((F(sh["mass"]), knee + F(sh["com_dist"]) * e(ths), shank[i], F(sh["inertia"])))
            joint, link_len, fl = knee, F(sh["length"]), shank[i]
        else:
            joint, link_len, fl = hip, F(leg["length"]), 2 + i
        R, d = F(leg["foot_radius"]), F(leg["arc_offset"])
        centre = joint + (link_len - R) * e(q[fl]) + d * ep(q[fl])
        feet.append((centre, R, fl))
    if torso is not None:
        t = case["torso"]
        bodies.append((F(t["mass"]), hip - F(t["com_dist"]) * e(q[torso]), torso, F(t["inertia"])))
    qv = sp.Matrix(q)
    qdv = sp.Matrix(qd)
    T = 0
    V = 0
    for mass, pos, ang, inertia in bodies:
        vel = pos.jacobian(qv) * qdv
        T += mass * (vel.T * vel)[0] / 2
        if ang is not None:
            T += inertia * qd[ang] ** 2 / 2
        V += mass * g * pos[1]
    T = sp.expand(T)
    M = sp.hessian(T, qd)
    L = T - V
    dLdqd = sp.Matrix([sp.diff(L, x) for x in qd])
    # d/dt dL/dqd = M qdd + (d(dL/dqd)/dq) qd; h collects everything but M qdd.
    h = dLdqd.jacobian(qv) * qdv - sp.Matrix([sp.diff(L, x) for x in q])
    # Input matrix by virtual work of the joint torques.
    rel = []
    if torso is None:
        rel.append(q[3] - q[2])
    else:
        rel += [q[2] - q[torso], q[3] - q[torso]]
    for i, leg in enumerate(case["legs"]):
        if shank[i] is not None and leg["shank"].get("actuated"):
            rel.append(q[shank[i]] - q[2 + i])
    B = sp.Matrix([[sp.diff(r, x) for r in rel] for x in q])
    tv = sp.Matrix([sp.cos(s), sp.sin(s)])
    nv = sp.Matrix([-sp.sin(s), sp.cos(s)])
    out = {"M": M, "h": h, "T": T, "V": V}
    for i, (centre, R, fl) in enumerate(feet):
        vc = centre.jacobian(qv) * qdv
        vp = vc + qd[fl] * R * tv  # omega z x (-R n) = R omega t
        rows = sp.Matrix([tv.dot(vp), nv.dot(vp)])
        J = rows.jacobian(qdv)
        jdv = (J * qdv).jacobian(qv) * qdv
        out[f"J{i}"] = J
        out[f"jdot_v{i}"] = jdv
        out[f"centre{i}"] = centre
        out[f"gap{i}"] = nv.dot(centre) - R
    Jk = []
    for i in range(2):
        if shank[i] is not None:
            row = [0] * n
            row[shank[i]], row[2 + i] = 1, -1
            Jk.append(row)
    return out, B, Jk, n, q, qd


def lamb(expr, q, qd, module):
    return sp.lambdify([q, qd], expr, modules=module)


def random_state(rng, case, f, n, shank, locked):
    th = rng.uniform(-0.4, 0.4, size=n - 2)
    thd = rng.uniform(-2.0, 2.0, size=n - 2)
    for i in range(2):
        if shank[i] is not None:
            k = shank[i] - 2
            if locked:
                th[k], thd[k] = th[i], thd[i]
            else:
                th[k] = th[i] - rng.uniform(0.0, 0.6)  # flexed knee: shank behind the thigh
    q0 = [0.0, 0.0] + [float(x) for x in th]
    c0 = [float(x) for x in numpy.ravel(f["centre0"](q0, [0.0] * n))]
    u = float(rng.uniform(-1.0, 1.0))
    s_, R0 = case["slope"], case["legs"][0]["foot_radius"]
    want = [u * numpy.cos(s_) - R0 * numpy.sin(s_), u * numpy.sin(s_) + R0 * numpy.cos(s_)]
    qq = [want[0] - c0[0], want[1] - c0[1]] + q0[2:]
    J = numpy.array(f["J0"](qq, [0.0] * n), dtype=float)
    vh = numpy.linalg.solve(J[:, :2], -J[:, 2:] @ thd)
    vv = [float(vh[0]), float(vh[1])] + [float(x) for x in thd]
    tau = [float(x) for x in rng.uniform(-20.0, 20.0, size=4)]
    return qq, vv, tau


def mat(x):
    return [[float(x[i, j]) for j in range(x.cols)] for i in range(x.rows)]


def vec(x):
    return [float(x[i, 0]) for i in range(x.rows)] if isinstance(x, mpmath.matrix) else [float(v) for v in x]


def solve_rolling(M, h, B, tau, J, jdv, Jk, n):
    """Left foot rolling (J q'' + J' q' = 0) and the knee rows of Jk held
    (Jk q'' = 0): [M -A^T; A 0][q''; lam] = [B tau - h; -b]."""
    rows = [[J[r, c] for c in range(n)] for r in range(2)] + [[mpmath.mpf(x) for x in row] for row in Jk]
    bot = [-jdv[0, 0], -jdv[1, 0]] + [mpmath.mpf(0)] * len(Jk)
    k = len(rows)
    K = mpmath.zeros(n + k, n + k)
    rhs = mpmath.zeros(n + k, 1)
    for a in range(n):
        for b in range(n):
            K[a, b] = M[a, b]
        for r in range(k):
            K[a, n + r] = -rows[r][a]
            K[n + r, a] = rows[r][a]
        rhs[a] = sum(B[a, j] * tau[j] for j in range(B.cols)) - h[a, 0]
    for r in range(k):
        rhs[n + r] = bot[r]
    sol = mpmath.lu_solve(K, rhs)
    return [sol[a] for a in range(n)], [sol[n + r] for r in range(k)]


def evaluate(case):
    exprs, B, Jk, n, q, qd = derive(case)
    _, _, shank = layout(case)
    fm = {k: lamb(v, q, qd, "mpmath") for k, v in exprs.items()}
    ff = {k: lamb(v, q, qd, "numpy") for k, v in exprs.items()}
    Bm = mpmath.matrix([[float(B[i, j]) for j in range(B.cols)] for i in range(B.rows)])
    rng = numpy.random.default_rng(case["seed"])
    states = []
    for j in range(N_STATES):
        locked = j % 3 == 2
        qq, vv, tau = random_state(rng, case, ff, n, shank, locked)
        tau = tau[:B.cols]
        qm = [mpmath.mpf(x) for x in qq]
        vm = [mpmath.mpf(x) for x in vv]
        M = mpmath.matrix(fm["M"](qm, vm))
        h = mpmath.matrix(fm["h"](qm, vm))
        Mf = numpy.array(mat(M))
        assert numpy.allclose(Mf, Mf.T, atol=1e-13), "M not symmetric"
        assert numpy.linalg.eigvalsh(Mf).min() > 0, "M not positive definite"
        vcol = mpmath.matrix(vm)
        T = fm["T"](qm, vm)
        assert abs(T - (vcol.T * M * vcol)[0] / 2) < mpmath.mpf(10) ** -30 * (1 + abs(T)), "T != v^T M v / 2"
        feet = []
        Js, jdvs = [], []
        for i in range(2):
            J = mpmath.matrix(fm[f"J{i}"](qm, vm))
            jdv = mpmath.matrix(fm[f"jdot_v{i}"](qm, vm))
            Js.append(J)
            jdvs.append(jdv)
            feet.append({"arc_center": vec(mpmath.matrix(fm[f"centre{i}"](qm, vm))),
                         "gap": float(fm[f"gap{i}"](qm, vm)),
                         "jacobian": mat(J), "jdot_v": vec(jdv), "point_velocity": vec(J * vcol)})
        assert max(abs(x) for x in Js[0] * vcol) < 1e-12, "left foot not at rest"
        # J' q' against a central difference of J along q' (doubles).
        for i in range(2):
            eps = 1e-6
            Jp = numpy.array(ff[f"J{i}"]([a + eps * b for a, b in zip(qq, vv)], vv), dtype=float)
            Jm = numpy.array(ff[f"J{i}"]([a - eps * b for a, b in zip(qq, vv)], vv), dtype=float)
            fd = (Jp - Jm) / (2 * eps) @ numpy.array(vv)
            assert numpy.allclose(fd, vec(jdvs[i]), rtol=1e-6, atol=1e-6), f"jdot_v foot {i}"
        acc, lam = solve_rolling(M, h, Bm, tau, Js[0], jdvs[0], [], n)
        st = {"q": qq, "v": vv, "tau": tau, "knees_locked": locked,
              "mass_matrix": mat(M), "bias": vec(h),
              "kinetic_energy": float(T), "potential_energy": float(fm["V"](qm, vm)),
              "feet": feet,
              "left_rolling": {"accel": [float(a) for a in acc], "force": [float(x) for x in lam]}}
        # Power balance of the free-knee rolling motion at 40 digits.
        dE = (sp.Matrix([exprs["T"] + exprs["V"]]).jacobian(sp.Matrix(list(q) + list(qd))))
        gE = mpmath.matrix(lamb(dE, q, qd, "mpmath")(qm, vm))
        rate = sum(gE[0, a] * vm[a] for a in range(n)) + sum(gE[0, n + a] * acc[a] for a in range(n))
        power = sum((Bm.T * vcol)[c] * tau[c] for c in range(len(tau)))
        power += sum(Js[0][r, a] * lam[r] * vm[a] for r in range(2) for a in range(n))
        assert abs(rate - power) < mpmath.mpf(10) ** -25 * (1 + abs(rate)), f"power balance {rate} vs {power}"
        if locked:
            acc2, lam2 = solve_rolling(M, h, Bm, tau, Js[0], jdvs[0], Jk, n)
            st["left_rolling_knees_locked"] = {"accel": [float(a) for a in acc2],
                                               "force": [float(x) for x in lam2[:2]],
                                               "knee_multiplier": [float(x) for x in lam2[2:]]}
        states.append(st)
    return {"name": case["name"], "params": {k: case[k] for k in ("hip_mass", "gravity", "slope", "torso", "legs")},
            "dof": n, "input_matrix": mat(Bm), "knee_constraint": Jk, "states": states}


def main():
    mpmath.mp.dps = DPS
    cases = [evaluate(c) for c in CASES]
    import scipy  # noqa: F401  (version recorded for the fixtures' header)
    out = {
        "source": "SymPy derivation by Lagrange's equations of the kneed walker (planar tree: hip mass, thighs, shanks, "
                  "optional torso, arc feet on the shanks), independent of the Go code, evaluated with mpmath at %d "
                  "digits and rounded to double" % DPS,
        "generator": GENERATOR, "regenerate": REGENERATE,
        "versions": {"python": platform.python_version(), "sympy": sp.__version__, "numpy": numpy.__version__,
                     "scipy": scipy.__version__, "mpmath": mpmath.__version__},
        "conventions": CONVENTIONS,
        "cases": cases,
    }
    with open(OUT, "w") as fh:
        json.dump(out, fh, indent=1)
        fh.write("\n")
    print(f"wrote {os.path.relpath(OUT)}: {len(cases)} cases, {sum(len(c['states']) for c in cases)} states; checks passed")


if __name__ == "__main__":
    sys.exit(main())
