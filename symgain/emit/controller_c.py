"""The C controller: ``<prefix>_controller_t`` and its init, set_parameters, reset and step.

The same law per sample as the Python ``Controller``
(:mod:`symgain.emit.controller_python`): current-form estimate (when asked),
u = -K x - Ki q + N r, saturation to [min, max] and to rate * T per sample,
integrator with anti-windup (back-calculation per input channel through the
pseudo-inverse of Ki, computed at init by Gauss-Jordan elimination), estimator update with the applied u (forward
Euler at T for a continuous design). Every matrix comes from a function of
the same file (``<prefix>_feedback_gain``, ``<prefix>_plant_Phi``, ...). C99,
no dynamic memory, fixed sizes.

Return codes of init and set_parameters: 0 ok; -1 a bad sample period (not
positive, or not the period the design was made for); -2 a parameter breaks
its declared sign or range (the range test is left out when the source is
compiled with ``-D<PREFIX>_NO_RANGE_CHECKS``); -3 a validity condition fails
(a gain or plant function returned nonzero, or, with back-calculation, Ki has not
full column rank). On an error the controller keeps its previous gains.

>>> import sympy as sp
>>> from symgain.model import Model, Parameter, TargetSpec
>>> from symgain.design import derive
>>> from symgain.emit.c import c_files
>>> m = Parameter.declare("m", sign="positive", range=(1, 2))
>>> model = Model(name="cart", parameters=(m,), states=("p", "v"), inputs=("F",),
...               A=sp.Matrix([[0, 1], [0, 0]]), B=sp.Matrix([[0], [1 / m.symbol]]),
...               feedback=TargetSpec("poles", {"poles": (-1, -1)}))
>>> header, source = c_files(derive(model), "cart")
>>> "int cart_controller_init(cart_controller_t *ctl, double T, double m);" in header
True
"""
from __future__ import annotations

import sympy as sp

from ..design import Design
from ..errors import OutputError
from .common import mangle, range_macro, range_test

__all__ = ["controller_c"]

_LOCALS = {"ctl", "T", "y", "r", "u", "un", "rc", "i", "j", "x", "uw", "e", "push", "freeze", "step_limit", "xn",
           "innov", "K", "Ki", "L", "N", "A", "B", "C", "D", "U", "TT", "KiP", "G", "big", "k", "piv", "swap",
           "f", "corr"}


def _lit(value: float, ctype: str) -> str:
    text = repr(float(value))
    return text + ("f" if ctype == "float" else "")


def controller_c(design: Design, prefix: str, ctype: str, reserved: set[str]):
    """(header lines, source lines) of the controller (functions of the design already emitted)."""
    from .controller_python import _sample_period

    model = design.model
    names = {p.name: mangle(p.name, set(reserved) | _LOCALS) for p in model.parameters}
    _, pname_py, fixed = _sample_period(design, {p.name: p.name for p in model.parameters})
    period_param = pname_py  # model name of the period parameter, or None
    args = [p.name for p in model.parameters if p.name != period_param]
    n, m, p = model.n_states, model.n_inputs, model.n_outputs
    discrete = design.sampled is not None
    has_L, has_I, has_N = design.estimator is not None, design.integral is not None, design.feedforward is not None
    current = discrete and has_L and model.sampling.estimator_form == "current"
    aw = model.anti_windup or {"method": "clamp", "tracking_time": None}
    back = has_I and aw["method"] == "back_calculation"
    P = prefix
    t = ctype
    fabs = "fabsf" if t == "float" else "fabs"
    delay = discrete and model.sampling.compute_delay
    nk = n + m if delay else n  # columns of K: the state, and u[k-1] with the computation delay
    mats = [("K", m, nk, "integral_state_gain" if has_I else "feedback_gain")]
    if has_I:
        mats.append(("Ki", m, p, "integral_gain"))
    if has_L:
        mats.append(("L", n, p, "estimator_gain"))
    if has_N:
        mats.append(("N", m, p, "feedforward_gain"))
    mats += [("A", n, n, "plant_Phi" if discrete else "plant_A"), ("B", n, m, "plant_Gamma" if discrete else "plant_B")]
    if p:
        mats += [("C", p, n, "plant_C"), ("D", p, m, "plant_D")]
    mats.append(("U", 3, m, "input_limits"))
    if back and aw.get("tracking_time") is not None:
        mats.append(("TT", 1, 1, "tracking_time"))
    sig_args = ", ".join(f"{t} {names[a]}" for a in args)
    init_sig = f"int {P}_controller_init({P}_controller_t *ctl, {t} T" + (f", {sig_args}" if args else "") + ")"
    set_sig = f"int {P}_controller_set_parameters({P}_controller_t *ctl" + (f", {sig_args}" if args else "") + ")"
    step_sig = f"int {P}_controller_step({P}_controller_t *ctl, const {t} *y, const {t} *r, {t} *u)"
    reset_sig = f"void {P}_controller_reset({P}_controller_t *ctl)"
    kind = "sampled-data design" if discrete else "continuous design emulated at T (forward Euler)"
    h = [f"/* The controller that runs at sample period T ({kind}).",
         f" * {P}_controller_init(ctl, T, parameters...) and {P}_controller_set_parameters(ctl, parameters...)",
         " * return 0, or -1 (bad sample period), -2 (a parameter breaks its declared sign or range),",
         " * -3 (a validity condition fails); the controller then keeps its previous gains.",
         f" * Compiled with -D{range_macro(P)}, the range tests are left out (signs still hold).",
         f" * {P}_controller_step(ctl, y, r, u): y holds {p if has_L else n} "
         f"{'measured outputs' if has_L else 'states (the full state)'}, r {p} references (NULL: zeros),",
         f" * u receives {m} inputs. Law: u = -K x - Ki q + N r, clipped to [u_min, u_max] and to rate * T per",
         f" * sample; q += T (y - r) with anti-windup ({aw['method']}); estimator "
         f"({'current' if current else 'prediction'} form) advanced with the applied u."]
    if delay:
        h += [" * Computation delay: u receives the input computed at the previous sample (apply it now);",
              " * the one computed from this y is held in u_held, K acts on [x; u_held]."]
    if fixed is not None:
        h.append(f" * The design was made for T = {fixed!r} s; init refuses any other period.")
    if period_param is not None:
        h.append(f" * The parameter {period_param} is the sample period T.")
    h += [" */", "typedef struct {", f"    {t} T;"]
    for a in [pp.name for pp in model.parameters]:
        h.append(f"    {t} {names[a]};")
    for label, r_, c_, _ in mats:
        if label == "U":
            h += [f"    {t} u_min[{m}];", f"    {t} u_max[{m}];", f"    {t} rate[{m}];"]
        elif label != "TT":
            h.append(f"    {t} {label}[{r_}][{c_}];")
    if has_I:
        h.append(f"    {t} tracking_time;")
        if back:
            h.append(f"    {t} Ki_pinv[{p}][{m}];  /* pseudo-inverse of Ki: (Ki^T Ki)^-1 Ki^T */")
        h.append(f"    {t} q[{p}];")
    if has_L:
        h.append(f"    {t} x_hat[{n}];")
    if delay:
        h.append(f"    {t} u_held[{m}];")
    h += [f"    {t} u_last[{m}];", f"    int saturated[{m}];", f"}} {P}_controller_t;", "",
          init_sig + ";", set_sig + ";", reset_sig + ";", step_sig + ";", ""]
    s = [init_sig, "{"]
    s.append(f"    if (!(T > 0)) {{\n        return -1;\n    }}")
    if fixed is not None:
        s.append(f"    if ({fabs}(T - {_lit(fixed, t)}) > {_lit(1e-9, t)} * {_lit(fixed, t)}) {{\n        return -1;\n    }}")
    s.append("    ctl->T = T;")
    s.append(f"    int rc = {P}_controller_set_parameters(ctl" + (", " + ", ".join(names[a] for a in args) if args else "")
             + ");")
    s += ["    if (rc != 0) {", "        return rc;", "    }", f"    {P}_controller_reset(ctl);", "    return 0;", "}", ""]
    s += [set_sig, "{"]
    for label, r_, c_, _ in mats:  # zero-filled: a gain function that fails leaves its matrix untouched
        s.append(f"    {t} {label}[{r_}][{c_}] = {{{{0}}}};")
    s.append("    int i, j;")
    if period_param is not None:
        s.append(f"    const {t} {names[period_param]} = ctl->T;")
    for pp in model.parameters:
        v = names[pp.name]
        conds = []
        if pp.sign == "positive":
            conds.append(f"!({v} > 0)")
        elif pp.sign == "nonnegative":
            conds.append(f"!({v} >= 0)")
        elif pp.sign == "nonzero":
            conds.append(f"{v} == 0")
        if conds:
            s.append(f"    if ({' || '.join(conds)}) {{\n        return -2;\n    }}")
        outside = range_test(v, pp.range, t)
        if outside is not None:  # the design envelope, removable at compile time
            s.append(f"#ifndef {range_macro(P)}\n    if ({outside}) {{\n        return -2;\n    }}\n#endif")
    fargs = ", ".join(names[pp.name] for pp in model.parameters)
    for label, _, _, fn in mats:
        s.append(f"    if ({P}_{fn}({fargs + ', ' if fargs else ''}{label}) != 0) {{\n        return -3;\n    }}")
    if back:
        s += _pinv_lines(m, p, t)
    for pp in model.parameters:
        s.append(f"    ctl->{names[pp.name]} = {names[pp.name]};")
    for label, r_, c_, _ in mats:
        if label == "U":
            s.append(f"    for (j = 0; j < {m}; ++j) {{\n        ctl->u_min[j] = U[0][j];\n"
                     f"        ctl->u_max[j] = U[1][j];\n        ctl->rate[j] = U[2][j];\n    }}")
        elif label == "TT":
            continue
        else:
            s.append(f"    for (i = 0; i < {r_}; ++i) {{\n        for (j = 0; j < {c_}; ++j) {{\n"
                     f"            ctl->{label}[i][j] = {label}[i][j];\n        }}\n    }}")
    if has_I:
        tt = "TT[0][0]" if any(x[0] == "TT" for x in mats) else f"{_lit(10.0, t)} * ctl->T"
        s.append(f"    ctl->tracking_time = {tt};")
        if back:
            s.append(f"    for (i = 0; i < {p}; ++i) {{\n        for (j = 0; j < {m}; ++j) {{\n"
                     "            ctl->Ki_pinv[i][j] = KiP[i][j];\n        }\n    }")
    s += ["    return 0;", "}", ""]
    s += [reset_sig, "{", "    int i;"]
    s.append(f"    for (i = 0; i < {m}; ++i) {{\n        ctl->u_last[i] = 0;\n        ctl->saturated[i] = 0;\n"
             + ("        ctl->u_held[i] = 0;\n" if delay else "") + "    }")
    if has_I:
        s.append(f"    for (i = 0; i < {p}; ++i) {{\n        ctl->q[i] = 0;\n    }}")
    if has_L:
        s.append(f"    for (i = 0; i < {n}; ++i) {{\n        ctl->x_hat[i] = 0;\n    }}")
    s += ["}", ""]
    s += _step(step_sig, n, m, p, t, has_L, has_I, has_N, discrete, current, back, delay)
    return h, s


def _pinv_lines(m: int, p: int, t: str) -> list[str]:
    """C lines computing KiP = (Ki^T Ki)^-1 Ki^T (p x m) by Gauss-Jordan elimination with partial
    pivoting on [Ki^T Ki | I]; -3 when Ki has not full column rank (a pivot below 1e-12 of the
    largest entry, 1e-6 in single precision)."""
    fabs = "fabsf" if t == "float" else "fabs"
    tol = _lit(1e-6 if t == "float" else 1e-12, t)
    zero = _lit(0.0, t)
    return [f"    {t} KiP[{p}][{m}];", "    {", f"        {t} G[{p}][{2 * p}];", f"        {t} big = {zero};",
            "        int k, piv;",
            f"        for (i = 0; i < {p}; ++i) {{", f"            for (j = 0; j < {p}; ++j) {{",
            f"                G[i][j] = {zero};",
            f"                for (k = 0; k < {m}; ++k) {{\n                    G[i][j] += Ki[k][i] * Ki[k][j];\n"
            "                }",
            f"                G[i][{p} + j] = i == j ? {_lit(1.0, t)} : {zero};",
            f"                big = {fabs}(G[i][j]) > big ? {fabs}(G[i][j]) : big;", "            }", "        }",
            f"        for (j = 0; j < {p}; ++j) {{", "            piv = j;",
            f"            for (i = j + 1; i < {p}; ++i) {{",
            f"                piv = {fabs}(G[i][j]) > {fabs}(G[piv][j]) ? i : piv;", "            }",
            f"            if (!({fabs}(G[piv][j]) > {tol} * big)) {{\n                return -3;\n            }}",
            f"            for (k = 0; k < {2 * p}; ++k) {{",
            f"                {t} swap = G[j][k];", "                G[j][k] = G[piv][k];",
            "                G[piv][k] = swap;", "            }",
            f"            for (k = {2 * p - 1}; k >= j; --k) {{\n                G[j][k] /= G[j][j];\n            }}",
            f"            for (i = 0; i < {p}; ++i) {{", "                if (i != j) {",
            f"                    {t} f = G[i][j];",
            f"                    for (k = j; k < {2 * p}; ++k) {{\n                        G[i][k] -= f * G[j][k];\n"
            "                    }", "                }", "            }", "        }",
            f"        for (i = 0; i < {p}; ++i) {{", f"            for (j = 0; j < {m}; ++j) {{",
            f"                KiP[i][j] = {zero};",
            f"                for (k = 0; k < {p}; ++k) {{\n                    KiP[i][j] += G[i][{p} + k] * Ki[j][k];\n"
            "                }", "            }", "        }", "    }"]


def _step(sig, n, m, p, t, has_L, has_I, has_N, discrete, current, back, delay=False) -> list[str]:
    zero = "0.0f" if t == "float" else "0.0"
    nk = n + m if delay else n
    cu = "un" if delay else "u"  # the input computed now
    au = "ctl->u_held" if delay else "u"  # the input that acts during this sample
    base = "ctl->u_held" if delay else "ctl->u_last"  # the rate limit's previous value
    s = [sig, "{", f"    {t} x[{nk}];", f"    {t} uw[{m}];", "    int i, j;"]
    if delay:
        s.append(f"    {t} un[{m}];")
    if p and (has_I or has_L):
        s.append(f"    {t} e[{p}];")
    if p and (has_I or has_N):
        s.append(f"    {t} rr[{p}];")
        s.append(f"    for (i = 0; i < {p}; ++i) {{\n        rr[i] = r ? r[i] : {zero};\n    }}")
    else:
        s.append("    (void)r;  /* no integral action or feedforward: the reference is not used */")
    if has_L:
        s.append(f"    {t} xn[{n}];")
    if current:
        s += [f"    for (i = 0; i < {p}; ++i) {{", "        e[i] = y[i];",
              f"        for (j = 0; j < {n}; ++j) {{\n            e[i] -= ctl->C[i][j] * ctl->x_hat[j];\n        }}",
              "    }",
              f"    for (i = 0; i < {n}; ++i) {{",
              f"        for (j = 0; j < {p}; ++j) {{\n            ctl->x_hat[i] += ctl->L[i][j] * e[j];\n        }}",
              "    }"]
    src = "ctl->x_hat[i]" if has_L else "y[i]"
    s.append(f"    for (i = 0; i < {n}; ++i) {{\n        x[i] = {src};\n    }}")
    if delay:
        s.append(f"    for (i = 0; i < {m}; ++i) {{\n        x[{n} + i] = ctl->u_held[i];\n    }}")
    s += [f"    for (i = 0; i < {m}; ++i) {{", f"        {t} v = {zero};",
          f"        {t} lo, hi;",
          f"        for (j = 0; j < {nk}; ++j) {{\n            v -= ctl->K[i][j] * x[j];\n        }}"]
    if has_I:
        s.append(f"        for (j = 0; j < {p}; ++j) {{\n            v -= ctl->Ki[i][j] * ctl->q[j];\n        }}")
    if has_N:
        s.append(f"        for (j = 0; j < {p}; ++j) {{\n            v += ctl->N[i][j] * rr[j];\n        }}")
    s += ["        uw[i] = v;",
          "        v = v < ctl->u_min[i] ? ctl->u_min[i] : (v > ctl->u_max[i] ? ctl->u_max[i] : v);",
          f"        lo = {base}[i] - ctl->rate[i] * ctl->T;",
          f"        hi = {base}[i] + ctl->rate[i] * ctl->T;",
          "        v = v < lo ? lo : (v > hi ? hi : v);",
          f"        {cu}[i] = v;",
          "        ctl->saturated[i] = v != uw[i];",
          "    }"]
    if has_I:
        if has_L:
            s.append(f"    for (i = 0; i < {p}; ++i) {{\n        e[i] = y[i] - rr[i];\n    }}")
        else:
            s += [f"    for (i = 0; i < {p}; ++i) {{", "        e[i] = -rr[i];",
                  f"        for (j = 0; j < {n}; ++j) {{\n            e[i] += ctl->C[i][j] * y[j];\n        }}",
                  f"        for (j = 0; j < {m}; ++j) {{\n            e[i] += ctl->D[i][j] * {au}[j];\n        }}",
                  "    }"]
        if back:
            # per input channel: q += T (e - pinv(Ki) (u - u_wanted) / tracking_time)
            s += [f"    for (i = 0; i < {p}; ++i) {{", f"        {t} corr = {zero};",
                  f"        for (j = 0; j < {m}; ++j) {{\n            corr += ctl->Ki_pinv[i][j] * ({cu}[j] - uw[j]);\n"
                  "        }",
                  "        ctl->q[i] += ctl->T * (e[i] - corr / ctl->tracking_time);", "    }"]
        else:
            s += ["    {", "        int freeze = 0;",
                  f"        for (i = 0; i < {m}; ++i) {{",
                  f"            {t} push = {zero};",
                  f"            for (j = 0; j < {p}; ++j) {{\n                push -= ctl->Ki[i][j] * (ctl->T * e[j]);\n            }}",
                  f"            if (ctl->saturated[i] && ((uw[i] > {cu}[i] && push > 0) || (uw[i] < {cu}[i] && push < 0))) {{",
                  "                freeze = 1;", "            }", "        }",
                  "        if (!freeze) {",
                  f"            for (j = 0; j < {p}; ++j) {{\n                ctl->q[j] += ctl->T * e[j];\n            }}",
                  "        }", "    }"]
    if has_L:
        s += [f"    for (i = 0; i < {n}; ++i) {{", f"        {t} v = {zero};",
              f"        for (j = 0; j < {n}; ++j) {{\n            v += ctl->A[i][j] * ctl->x_hat[j];\n        }}",
              f"        for (j = 0; j < {m}; ++j) {{\n            v += ctl->B[i][j] * {au}[j];\n        }}",
              "        xn[i] = v;", "    }"]
        if not current:
            s += [f"    for (j = 0; j < {p}; ++j) {{", "        e[j] = y[j];",
                  f"        for (i = 0; i < {n}; ++i) {{\n            e[j] -= ctl->C[j][i] * ctl->x_hat[i];\n        }}",
                  f"        for (i = 0; i < {m}; ++i) {{\n            e[j] -= ctl->D[j][i] * {au}[i];\n        }}",
                  "    }",
                  f"    for (i = 0; i < {n}; ++i) {{",
                  f"        for (j = 0; j < {p}; ++j) {{\n            xn[i] += ctl->L[i][j] * e[j];\n        }}",
                  "    }"]
        if discrete:
            s.append(f"    for (i = 0; i < {n}; ++i) {{\n        ctl->x_hat[i] = xn[i];\n    }}")
        else:  # forward Euler: xn holds A x_hat + B u + L (y - C x_hat - D u)
            s.append(f"    for (i = 0; i < {n}; ++i) {{\n        ctl->x_hat[i] += ctl->T * xn[i];\n    }}")
    if delay:  # apply the input computed at the previous sample, hold the new one
        s.append(f"    for (i = 0; i < {m}; ++i) {{\n        u[i] = ctl->u_held[i];\n        ctl->u_held[i] = un[i];\n    }}")
    s.append(f"    for (i = 0; i < {m}; ++i) {{\n        ctl->u_last[i] = u[i];\n    }}")
    s += ["    return 0;", "}"]
    return s
