"""An independent closed-loop reference for the emitted controllers (shared by their tests).

Built only from the design's JSON (gain formulas as strings), the model's continuous A, B,
C and scipy.signal.cont2discrete for the sampled plant (common practice: the exact
zero-order hold), with the control law of the shared controller contract written out here
a second time, plainly, as a recursion. With ``compute_delay`` the input computed from y[k]
acts on the plant from k+1 on (the recorded u is the one acting during each sample).
"""
from __future__ import annotations

import numpy as np
import scipy.signal
import sympy as sp

from symgain.emit.json import design_to_dict


def numeric(strings, values):
    """A JSON matrix (list of rows of strings) at numeric parameter values, rounded to float64.

    Evaluated by mpmath at 40 digits and then rounded: the emitted code prints its own forms of
    the formulas (short-period stable forms, symgain.emit.stable_forms), so the reference is the
    correctly rounded value of the JSON formulas, and differences measure the controller logic
    (the emitter tests bound the formulas' round-off separately against 40-digit values).
    """
    import mpmath

    names = {k: sp.Symbol(k) for k in values}
    exprs = [[sp.sympify(e, locals=names) for e in row] for row in strings]
    f = sp.lambdify(list(names.values()), exprs, modules="mpmath")
    with mpmath.workdps(40):
        out = f(*[mpmath.mpf(float(v)) for v in values.values()])
        return np.array([[float(mpmath.re(v)) for v in row] for row in out], dtype=float)


def plant(model, values):
    """Continuous A, B, C, D at the values (from the model, not from the design)."""
    sub = {p.symbol: values[p.name] for p in model.parameters}
    A = np.array(model.A.xreplace(sub), dtype=float)
    B = np.array(model.B.xreplace(sub), dtype=float)
    C = np.array(model.C.xreplace(sub), dtype=float) if model.C is not None else np.eye(A.shape[0])
    D = np.array(model.D.xreplace(sub), dtype=float) if model.D is not None else np.zeros((C.shape[0], B.shape[1]))
    return A, B, C, D


def limits(model, values):
    sub = {p.symbol: values[p.name] for p in model.parameters}
    m = model.n_inputs
    lo, hi, rate = np.full(m, -np.inf), np.full(m, np.inf), np.full(m, np.inf)
    for name, a, b, r in model.input_limits:
        i = model.inputs.index(name)
        lo[i] = -np.inf if a is None else float(a.xreplace(sub))
        hi[i] = np.inf if b is None else float(b.xreplace(sub))
        rate[i] = np.inf if r is None else float(r.xreplace(sub))
    return lo, hi, rate


def simulate(design, values, T, steps, x0, r, controller=None):
    """(u history, y history) of the sampled plant under the reference law, and the emitted
    controller's u history when ``controller`` is given (fed the same measurements)."""
    model = design.model
    data = design_to_dict(design)
    A, B, C, D = plant(model, values)
    n, m = B.shape
    ad, bd, *_ = scipy.signal.cont2discrete((A, B, C, D), T, method="zoh")
    integral = "integral" in data
    K = numeric(data["integral" if integral else "feedback"]["gain"], values)
    Ki = numeric(data["integral"]["integral_gain"], values) if integral else None
    L = numeric(data["estimator"]["gain"], values) if "estimator" in data else None
    N = numeric(data["feedforward"]["gain"], values) if "feedforward" in data else None
    discrete = design.sampled is not None
    current = discrete and model.sampling.estimator_form == "current"
    delay = discrete and model.sampling.compute_delay  # u[k] from y[k] acts from k+1 on
    if discrete:  # the controller's model of the plant: the design's Phi, Gamma (scipy's pair runs the plant)
        Pc, Gc = numeric(data["sampled"]["Phi"], values), numeric(data["sampled"]["Gamma"], values)
        assert np.max(np.abs(Pc - ad)) < 1e-8 and np.max(np.abs(Gc - bd)) < 1e-8 * max(1.0, np.max(np.abs(bd)))
    lo, hi, rate = limits(model, values)
    p = C.shape[0]
    x = np.array(x0, dtype=float)
    xh = np.zeros(n)
    q = np.zeros(p)
    u_last = np.zeros(m)
    v = np.zeros(m)  # with the delay: the input that acts during the current sample
    tt = None
    if integral and model.anti_windup and model.anti_windup.get("tracking_time") is not None:
        tt = float(sp.sympify(model.anti_windup["tracking_time"]).xreplace(
            {pp.symbol: values[pp.name] for pp in model.parameters}))
    method = (model.anti_windup or {}).get("method", "clamp")
    us, ys, uc = [], [], []
    for k in range(steps):
        y = C @ x + D @ u_last * 0  # D u enters with the u of this sample below (D = 0 in the examples)
        meas = y if L is not None else x
        if L is not None and current:  # current form: correct with this sample's y first
            xh = xh + L @ (y - C @ xh)
        xv = xh if L is not None else x
        if delay:
            xv = np.concatenate([xv, v])
        uw = -K @ xv
        if integral:
            uw = uw - Ki @ q
        if N is not None:
            uw = uw + N @ r
        u = np.minimum(np.maximum(uw, lo), hi)
        base = v if delay else u_last
        u = np.minimum(np.maximum(u, base - rate * T), base + rate * T)
        if controller is not None:
            uc.append(controller.step(meas, r))
        if integral:
            e = (y if L is not None else C @ x) - r
            if method == "back_calculation":
                q = q + T * (e - np.linalg.pinv(Ki) @ (u - uw) / tt)
            else:
                sat = u != uw
                push = -Ki @ (T * e)
                if not np.any((sat & (uw > u) & (push > 0)) | (sat & (uw < u) & (push < 0))):
                    q = q + T * e
        acting = v if delay else u
        if L is not None:
            if current:
                xh = Pc @ xh + Gc @ acting
            elif discrete:
                xh = Pc @ xh + Gc @ acting + L @ (y - C @ xh)
            else:
                xh = xh + T * (A @ xh + B @ acting + L @ (y - C @ xh))
        us.append(acting)
        ys.append(y)
        u_last = acting
        x = ad @ x + bd @ acting
        v = u
    return np.array(us), np.array(ys), (np.array(uc) if controller is not None else None)


def settling_index(ys, final, band=0.02):
    """First sample after which every |y - final| stays within band * |final|."""
    err = np.abs(ys - final) > band * abs(final)
    idx = np.nonzero(err)[0]
    return 0 if idx.size == 0 else int(idx[-1]) + 1
