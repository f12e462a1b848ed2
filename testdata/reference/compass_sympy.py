#!/usr/bin/python3
"""Independent symbolic reference for the compass walker with arc feet.

Regenerate (from the repository root):

    /usr/bin/python3 testdata/reference/compass_sympy.py

writes testdata/reference/compass_sympy.json. Needs Debian's python3-sympy,
python3-numpy (python3-mpmath comes with sympy).

The model is derived here from first principles, not from the Go code: the
positions of the hip mass, the two leg centres of mass and the foot arc
centres are written down from the geometry, the kinetic and potential
energies follow, and Lagrange's equations d/dt(dL/dq') - dL/dq = Q give the
mass matrix M(q) (the Hessian of T in q') and the bias h(q, q') (everything
in the equations that does not multiply q''). The contact Jacobian of each
foot is the Jacobian with respect to q' of the velocity of the foot's
material point at the contact, projected on the terrain tangent and normal.
The numbers are evaluated with mpmath at 40 digits and rounded to doubles
once, so the fixture is accurate to the last bit of a double or nearly so.

The same derivation is imported by passive_step_scipy.py (see model()).
The format of the JSON file is described in README.md beside this script.
"""

import json
import os
import platform
import sys

import mpmath
import numpy
import sympy as sp

HERE = os.path.dirname(os.path.abspath(__file__))
OUT = os.path.join(HERE, "compass_sympy.json")
GENERATOR = "testdata/reference/compass_sympy.py"
REGENERATE = "/usr/bin/python3 testdata/reference/compass_sympy.py"

CONVENTIONS = {
    "units": "SI: m, kg, kg*m^2, rad, s, N, N*m, N*s",
    "frame": "world x forward, y up, gravity -g*y",
    "coordinates": "q = (x_hip, y_hip, theta_left, theta_right); v = dq/dt",
    "angles": "counter-clockwise from the world vertical; leg axis e(theta) = (sin theta, -cos theta) from hip to foot; forward normal eperp(theta) = (cos theta, sin theta)",
    "bodies": "hip point mass at the hip; leg i: mass m, centre of mass at hip + c*e(theta_i), inertia I about its centre of mass, length L, foot arc radius R, arc centre at hip + (L-R)*e(theta_i) + d*eperp(theta_i), d = arc offset",
    "terrain": "straight line through the origin, slope s (positive uphill in +x); tangent t = (cos s, sin s), normal n = (-sin s, cos s)",
    "contact": "contact point = arc centre - R*n; gap = n.centre - R; Jacobian rows (t.v_p, n.v_p), v_p = v_centre + theta_i' z x (-R n), the velocity of the foot's material point at the contact; jdot_v = d/dt(J(q)) q' with n constant",
    "force": "lambda = (F_t, N), force of the ground on the foot along t and n",
    "dynamics": "M(q) q'' + h(q, q') = B tau + J^T lambda; h = Coriolis/centrifugal + gravity; B = (0, 0, -1, +1)^T (+tau on the right leg, -tau on the left)",
    "rolling": "J q'' + Jdot q' = 0 on the rolling foot, no stabilization",
    "energy": "V = g * sum(mass * y), zero at y = 0; T = 1/2 M_h |v_hip|^2 + sum over legs (1/2 m |v_com|^2 + 1/2 I theta'^2)",
    "matrices": "nested arrays, row-major: A[i][j] is row i, column j",
}

# Parameter symbols. Each leg has its own symbols so that legs may differ.
Mh, g, s = sp.symbols("M_h g s", real=True)
LEG_SYMS = [sp.symbols(f"L{i} m{i} c{i} I{i} R{i} d{i}", real=True) for i in range(2)]
PARAM_SYMS = [Mh, g, s] + [x for leg in LEG_SYMS for x in leg]

q = sp.Matrix(sp.symbols("x y th0 th1", real=True))
qd = sp.Matrix(sp.symbols("xd yd th0d th1d", real=True))
TAU = sp.Symbol("tau", real=True)


def ddt_vec(vec):
    """Time derivative of a vector function of q alone: (d vec/dq) q'."""
    return vec.jacobian(q) * qd


def derive():
    """Symbolic M, h, B, and per-foot kinematics of the compass walker."""
    hip = sp.Matrix([q[0], q[1]])
    tvec = sp.Matrix([sp.cos(s), sp.sin(s)])
    nvec = sp.Matrix([-sp.sin(s), sp.cos(s)])

    T = sp.Rational(1, 2) * Mh * (ddt_vec(hip).T * ddt_vec(hip))[0]
    V = Mh * g * hip[1]
    feet = []
    for i in range(2):
        L, m, c, I, R, d = LEG_SYMS[i]
        th = q[2 + i]
        thd = qd[2 + i]
        e = sp.Matrix([sp.sin(th), -sp.cos(th)])
        eperp = sp.Matrix([sp.cos(th), sp.sin(th)])
        com = hip + c * e
        vcom = ddt_vec(com)
        T += sp.Rational(1, 2) * m * (vcom.T * vcom)[0] + sp.Rational(1, 2) * I * thd**2
        V += m * g * com[1]

        centre = hip + (L - R) * e + d * eperp
        vcentre = ddt_vec(centre)
        # Rigid-body velocity of the leg's material point at centre - R n:
        # v_centre + omega z x (-R n), with z x (a, b) = (-b, a).
        r = -R * nvec
        vp = vcentre + thd * sp.Matrix([-r[1], r[0]])
        vt = (tvec.T * vp)[0]
        vn = (nvec.T * vp)[0]
        Jc = sp.Matrix([vt, vn]).jacobian(qd)
        Jv = Jc * qd
        # d/dt(J(q)) q' with q'' = 0 (n is constant on a straight segment).
        jdot_v = Jv.jacobian(q) * qd
        feet.append({
            "centre": centre,
            "contact": centre - R * nvec,
            "gap": (nvec.T * centre)[0] - R,
            "J": sp.simplify(Jc),
            "jdot_v": sp.simplify(jdot_v),
            "ahead": (tvec.T * (centre - R * nvec))[0],
        })

    Lag = T - V
    dL_dqd = sp.Matrix([Lag]).jacobian(qd).T
    M = dL_dqd.jacobian(qd)
    # Lagrange: d/dt(dL/dq') - dL/dq = M q'' + [ (d(dL/dq')/dq) q' - dL/dq ].
    h = dL_dqd.jacobian(q) * qd - sp.Matrix([Lag]).jacobian(q).T
    M = sp.simplify(M)
    h = sp.simplify(h)
    B = sp.Matrix([0, 0, -1, 1])
    # Gradient of the total energy, for the power-balance sanity check.
    E = T + V
    dE_dq = sp.Matrix([E]).jacobian(q)
    dE_dqd = sp.Matrix([E]).jacobian(qd)
    return {"M": M, "h": h, "B": B, "T": T, "V": V, "feet": feet,
            "dE_dq": dE_dq, "dE_dqd": dE_dqd, "t": tvec, "n": nvec}


def params_vector(p):
    vals = [p["hip_mass"], p["gravity"], p["slope"]]
    for leg in p["legs"]:
        vals += [leg["length"], leg["mass"], leg["com_dist"], leg["inertia"],
                 leg["foot_radius"], leg["arc_offset"]]
    return vals


_MODEL_CACHE = {}


def model(modules="math"):
    """Lambdified functions f(params_vector, q, qd) of the derivation.

    Returns a dict: M, h, T, V, and for foot i in 0, 1: J{i}, jdot_v{i},
    centre{i}, contact{i}, gap{i}, ahead{i} (position of the contact point
    along t). With modules="math" the results are nested lists of floats.
    """
    if modules in _MODEL_CACHE:
        return _MODEL_CACHE[modules]
    d = derive()
    args = [PARAM_SYMS, list(q), list(qd)]
    exprs = {"M": d["M"], "h": d["h"], "T": d["T"], "V": d["V"],
             "dE_dq": d["dE_dq"], "dE_dqd": d["dE_dqd"]}
    for i, f in enumerate(d["feet"]):
        for k in ("J", "jdot_v", "centre", "contact", "gap", "ahead"):
            exprs[f"{k}{i}"] = f[k]
    funcs = {}
    for k, v in exprs.items():
        if isinstance(v, sp.MatrixBase):
            v = v.tolist()
        funcs[k] = sp.lambdify(args, v, modules=modules, cse=True)
    funcs["B"] = [0.0, 0.0, -1.0, 1.0]
    funcs["derivation"] = d
    _MODEL_CACHE[modules] = funcs
    return funcs


# ---------------------------------------------------------------- fixture

CASES = [
    {
        "name": "arc_feet",
        "seed": 20261201,
        "params": {
            "hip_mass": 10.0,
            "legs": [dict(length=0.9, mass=3.0, com_dist=0.4, inertia=0.2,
                          foot_radius=0.27, arc_offset=0.01) for _ in range(2)],
            "gravity": 9.81,
            "slope": -0.02,
        },
    },
    {
        "name": "point_feet",
        "seed": 20261202,
        "params": {
            "hip_mass": 8.0,
            "legs": [dict(length=0.85, mass=2.5, com_dist=0.35, inertia=0.15,
                          foot_radius=0.0, arc_offset=0.0) for _ in range(2)],
            "gravity": 9.81,
            "slope": 0.03,
        },
    },
    {
        "name": "asymmetric",
        "seed": 20261203,
        "params": {
            "hip_mass": 12.0,
            "legs": [dict(length=0.92, mass=3.2, com_dist=0.42, inertia=0.22,
                          foot_radius=0.3, arc_offset=0.015),
                     dict(length=0.88, mass=2.8, com_dist=0.37, inertia=0.18,
                          foot_radius=0.25, arc_offset=-0.01)],
            "gravity": 9.80665,
            "slope": -0.05,
        },
    },
]

N_STATES = 12
DPS = 40


def mp_matrix(x):
    return mpmath.matrix(x) if isinstance(x, list) else mpmath.matrix([[x]])


def to_float(x):
    if isinstance(x, mpmath.matrix):
        rows = [[float(x[i, j]) for j in range(x.cols)] for i in range(x.rows)]
        return rows
    return float(x)


def vec(x):
    """Column (n x 1) mpmath matrix -> flat list of floats."""
    return [float(x[i, 0]) for i in range(x.rows)]


def random_state(rng, p, f):
    """Random angles, rates and torque; the hip placed so that the left foot
    touches the terrain at a random point and its material point is at rest."""
    pv = params_vector(p)
    th = rng.uniform(-0.5, 0.5, size=2)
    thd = rng.uniform(-2.0, 2.0, size=2)
    tau = float(rng.uniform(-20.0, 20.0))
    u = float(rng.uniform(-1.0, 1.0))
    # Left contact point u*t; centre = u*t + R n; hip = centre - offsets.
    q0 = [0.0, 0.0, float(th[0]), float(th[1])]
    c0 = f["centre0"](pv, q0, [0.0] * 4)
    s_, R0 = p["slope"], p["legs"][0]["foot_radius"]
    want = [u * numpy.cos(s_) - R0 * numpy.sin(s_), u * numpy.sin(s_) + R0 * numpy.cos(s_)]
    qq = [want[0] - float(c0[0][0]), want[1] - float(c0[1][0]), q0[2], q0[3]]
    # Hip velocity from J_left v = 0: [t; n] v_hip = -J[:, 2:] thd.
    J = numpy.array(f["J0"](pv, qq, [0.0] * 4), dtype=float)
    vh = numpy.linalg.solve(J[:, :2], -J[:, 2:] @ thd)
    vv = [float(vh[0]), float(vh[1]), float(thd[0]), float(thd[1])]
    return qq, vv, tau


def evaluate_case(case, fmath, fmp):
    p = case["params"]
    rng = numpy.random.default_rng(case["seed"])
    pv_f = params_vector(p)
    pv = [mpmath.mpf(x) for x in pv_f]
    B = mpmath.matrix([[0], [0], [-1], [1]])
    states = []
    for _ in range(N_STATES):
        qq, vv, tau = random_state(rng, p, fmath)
        qm = [mpmath.mpf(x) for x in qq]
        vm = [mpmath.mpf(x) for x in vv]
        M = mpmath.matrix(fmp["M"](pv, qm, vm))
        h = mpmath.matrix(fmp["h"](pv, qm, vm))
        vcol = mpmath.matrix(vm)
        feet = []
        Js, jdvs = [], []
        for i in range(2):
            J = mpmath.matrix(fmp[f"J{i}"](pv, qm, vm))
            jdv = mpmath.matrix(fmp[f"jdot_v{i}"](pv, qm, vm))
            Js.append(J)
            jdvs.append(jdv)
            feet.append({
                "arc_center": vec(mpmath.matrix(fmp[f"centre{i}"](pv, qm, vm))),
                "contact_point": vec(mpmath.matrix(fmp[f"contact{i}"](pv, qm, vm))),
                "gap": float(fmp[f"gap{i}"](pv, qm, vm)),
                "jacobian": to_float(J),
                "jdot_v": vec(jdv),
                "point_velocity": vec(J * vcol),
            })
        # Left foot rolling: [M -J^T; J 0][q''; lambda] = [B tau - h; -Jdot q'].
        J = Js[0]
        K = mpmath.zeros(6, 6)
        rhs = mpmath.zeros(6, 1)
        for a in range(4):
            for b in range(4):
                K[a, b] = M[a, b]
            for r in range(2):
                K[a, 4 + r] = -J[r, a]
                K[4 + r, a] = J[r, a]
            rhs[a] = B[a, 0] * tau - h[a, 0]
        for r in range(2):
            rhs[4 + r] = -jdvs[0][r, 0]
        sol = mpmath.lu_solve(K, rhs)
        acc = [sol[a] for a in range(4)]
        lam = [sol[4], sol[5]]
        check_state(p, fmp, pv, qm, vm, M, h, Js, jdvs, acc, lam, tau, fmath)
        states.append({
            "q": qq, "v": vv, "tau": tau,
            "mass_matrix": to_float(M),
            "bias": vec(h),
            "kinetic_energy": float(fmp["T"](pv, qm, vm)),
            "potential_energy": float(fmp["V"](pv, qm, vm)),
            "feet": feet,
            "left_rolling": {"accel": [float(a) for a in acc], "force": [float(x) for x in lam]},
        })
    return {"name": case["name"], "params": p, "seed": case["seed"],
            "input_matrix": [[0.0], [0.0], [-1.0], [1.0]], "states": states}


def check_state(p, fmp, pv, qm, vm, M, h, Js, jdvs, acc, lam, tau, fmath):
    """Sanity checks of the derivation at one state; raise on failure."""
    Mf = numpy.array(to_float(M))
    assert numpy.allclose(Mf, Mf.T, rtol=0, atol=1e-13), "M not symmetric"
    assert numpy.linalg.eigvalsh(Mf).min() > 0, "M not positive definite"
    # Closed forms written out by hand from the same geometry (the hip mass
    # and two pendulum legs on a moving pivot): M and h do not involve the
    # feet, so they must match these exactly.
    Mh_, g_ = float(pv[0]), float(pv[1])
    th = [float(qm[2]), float(qm[3])]
    w = [float(vm[2]), float(vm[3])]
    legs = p["legs"]
    mt = Mh_ + legs[0]["mass"] + legs[1]["mass"]
    Mc = numpy.zeros((4, 4))
    hc = numpy.zeros(4)
    Mc[0, 0] = Mc[1, 1] = mt
    hc[1] = mt * g_
    for i, leg in enumerate(legs):
        mc = leg["mass"] * leg["com_dist"]
        Mc[0, 2 + i] = Mc[2 + i, 0] = mc * numpy.cos(th[i])
        Mc[1, 2 + i] = Mc[2 + i, 1] = mc * numpy.sin(th[i])
        Mc[2 + i, 2 + i] = leg["mass"] * leg["com_dist"] ** 2 + leg["inertia"]
        hc[0] += -mc * numpy.sin(th[i]) * w[i] ** 2
        hc[1] += mc * numpy.cos(th[i]) * w[i] ** 2
        hc[2 + i] = mc * g_ * numpy.sin(th[i])
    assert numpy.allclose(Mf, Mc, rtol=1e-14, atol=1e-13), "M differs from the closed form"
    hf = numpy.array([float(h[i, 0]) for i in range(4)])
    assert numpy.allclose(hf, hc, rtol=1e-13, atol=1e-12), f"h differs from the closed form: {hf} vs {hc}"
    # T = 1/2 v^T M v.
    vcol = mpmath.matrix(vm)
    T = fmp["T"](pv, qm, vm)
    T2 = (vcol.T * M * vcol)[0] / 2
    assert abs(T - T2) <= mpmath.mpf(10) ** -30 * (1 + abs(T)), "T != v^T M v / 2"
    # Left foot at rest and on the ground (to double rounding).
    assert max(abs(x) for x in Js[0] * vcol) < 1e-12, "left foot not at rest"
    assert abs(fmp["gap0"](pv, qm, vm)) < 1e-12, "left foot not on the ground"
    # Power balance: dE/dt = v.(B tau + J^T lambda) along the constrained motion.
    dEq = mpmath.matrix(fmp["dE_dq"](pv, qm, vm))
    dEv = mpmath.matrix(fmp["dE_dqd"](pv, qm, vm))
    a = mpmath.matrix(acc)
    dE = (dEq * vcol)[0] + (dEv * a)[0]
    lamc = mpmath.matrix(lam)
    power = tau * (vm[3] - vm[2]) + ((Js[0].T * lamc).T * vcol)[0]
    assert abs(dE - power) < mpmath.mpf(10) ** -25 * (1 + abs(dE)), f"power balance {dE} vs {power}"
    # jdot_v against a central difference of J along v (doubles).
    pvf = [float(x) for x in pv]
    qf = [float(x) for x in qm]
    vf = [float(x) for x in vm]
    for i in range(2):
        eps = 1e-6
        Jp = numpy.array(fmath[f"J{i}"](pvf, [a_ + eps * b for a_, b in zip(qf, vf)], vf))
        Jm = numpy.array(fmath[f"J{i}"](pvf, [a_ - eps * b for a_, b in zip(qf, vf)], vf))
        fd = (Jp - Jm) / (2 * eps) @ numpy.array(vf)
        ex = numpy.array([float(jdvs[i][r, 0]) for r in range(2)])
        assert numpy.allclose(fd, ex, rtol=1e-7, atol=1e-7), f"jdot_v foot {i}: {fd} vs {ex}"


def versions():
    import scipy  # noqa: F401  (recorded for both fixtures; not used here)
    return {"python": platform.python_version(), "sympy": sp.__version__,
            "numpy": numpy.__version__, "scipy": scipy.__version__,
            "mpmath": mpmath.__version__}


def main():
    mpmath.mp.dps = DPS
    fmath = model("math")
    fmp = model("mpmath")
    cases = [evaluate_case(c, fmath, fmp) for c in CASES]
    out = {
        "source": "SymPy derivation by Lagrange's equations of the compass walker with arc feet and leg masses "
                  "(independent of the Go code), evaluated with mpmath at %d digits and rounded to double" % DPS,
        "generator": GENERATOR,
        "regenerate": REGENERATE,
        "versions": versions(),
        "conventions": CONVENTIONS,
        "cases": cases,
    }
    with open(OUT, "w") as fh:
        json.dump(out, fh, indent=1)
        fh.write("\n")
    n = sum(len(c["states"]) for c in cases)
    print(f"wrote {os.path.relpath(OUT)}: {len(cases)} cases, {n} states; all sanity checks passed")


if __name__ == "__main__":
    sys.exit(main())
