"""The ``Controller`` class of the emitted Python module (the shared controller contract).

The class wraps the module's gain functions into a sampled controller: per
sample, u = -K x_hat - Ki q + N r (x_hat = y when the model has no
estimator; N r only with [feedforward]), clipped to the actuator range and
rate from ``[input_limits]``; the integrator q[k+1] = q[k] + T (y - r) with
anti-windup (conditional integration, or back-calculation); the estimator
advanced by forward Euler with the applied (clipped) input. A continuous
design is thereby emulated at the sample period T.

>>> import sympy as sp
>>> from symgain.model import Model, Parameter, TargetSpec
>>> from symgain.design import derive
>>> from symgain.emit.python import python_module
>>> m = Parameter.declare("m", sign="positive", range=(1, 3))
>>> model = Model(name="cart", parameters=(m,), states=("p", "v"), inputs=("F",),
...               A=sp.Matrix([[0, 1], [0, 0]]), B=sp.Matrix([[0], [1 / m.symbol]]),
...               feedback=TargetSpec("poles", {"poles": (-1, -2)}),
...               extra={"input_limits": {"F": __import__("symgain.simulation.settings",
...                      fromlist=["InputLimit"]).InputLimit(min=-1, max=1)}})
>>> namespace = {}
>>> exec(python_module(derive(model)), namespace)
>>> ctl = namespace["Controller"](T=0.01, m=2.0)
>>> ctl.K.tolist()
[[4.0, 6.0]]
>>> ctl.step([0.1, 0.0]).tolist(), ctl.saturated.tolist()
([-0.4], [False])
>>> ctl.step([1.0, 0.0]).tolist(), ctl.saturated.tolist()
([-1.0], [True])
>>> namespace["Controller"](T=0.01, m=-1.0)
Traceback (most recent call last):
...
ValueError: Controller: m = -1 must be positive
"""
from __future__ import annotations

import sympy as sp

from ..design import Design
from .common import PYTHON_RESERVED, design_functions, mangle, shared_subexpressions

__all__ = ["controller_class", "constant_parameters"]


def constant_parameters(model) -> dict[str, float]:
    """Parameters fixed in the controller: no range, or a range of zero width (name -> value)."""
    return {p.name: p.nominal for p in model.parameters
            if p.nominal is not None and (p.range is None or p.range[0] == p.range[1])}


def _number(model, expr, default: str) -> str:
    if expr is None:
        return default
    value = sp.sympify(expr).xreplace({p.symbol: p.nominal for p in model.parameters if p.nominal is not None})
    if value.free_symbols:
        raise ValueError(f"an input limit depends on {sorted(map(str, value.free_symbols))} without nominal values")
    return repr(float(value))


def _plant_function(design: Design, printer, names: dict[str, str]) -> list[str]:
    model = design.model
    n, m = model.n_states, model.n_inputs
    C = model.C if model.C is not None else sp.eye(n)
    D = model.D if model.D is not None else sp.zeros(C.rows, m)
    rename = {p.symbol: sp.Symbol(names[p.name]) for p in model.parameters}
    mats = [sp.Matrix(M).xreplace(rename) for M in (model.A, model.B, C, D)]
    entries = [e for M in mats for e in M]
    replacements, reduced = shared_subexpressions(entries, set(names.values()) | {"out", "numpy"})
    body = [f"def _plant_matrices({', '.join(names[p.name] for p in model.parameters)}):",
            '    """A, B, C, D of the linear(ized) plant at the given parameter values."""']
    body += [f"    {sym} = {printer.doprint(expr)}" for sym, expr in replacements]
    k = 0
    outs = []
    for label, M in zip("ABCD", mats):
        body.append(f"    {label} = numpy.zeros(({M.rows}, {M.cols}))")
        for i in range(M.rows):
            for j in range(M.cols):
                if reduced[k] != 0:
                    body.append(f"    {label}[{i}, {j}] = {printer.doprint(reduced[k])}")
                k += 1
        outs.append(label)
    body.append("    return A, B, C, D")
    return body


_STEP = '''
    def step(self, y, r=None):
        """One sample: the input u to apply now (numpy array, one entry per input)."""
        y = numpy.asarray(y, dtype=numpy.float64).reshape(-1)
        if y.size != self._measured:
            raise ValueError(f"step: y has {y.size} entries, expected {self._measured}")
        r = numpy.zeros(self._outputs) if r is None else numpy.asarray(r, dtype=numpy.float64).reshape(-1)
        if r.size != self._outputs:
            raise ValueError(f"step: r has {r.size} entries, expected {self._outputs}")
        x = y if self.x_hat is None else self.x_hat
        u = -self.K @ x
        if self.Ki is not None:
            u = u - self.Ki @ self.q
        if self.N is not None:
            u = u + self.N @ r
        wanted = u
        u = numpy.clip(u, self.INPUT_MIN, self.INPUT_MAX)
        step = self.INPUT_RATE * self.T  # the rate limit counts from the last input (zero after reset)
        u = numpy.clip(u, self.u_last - step, self.u_last + step)
        self.saturated = numpy.abs(u - wanted) > 1e-12 * (1.0 + numpy.abs(wanted))
        if self.q is not None:
            output = (self._C @ x + self._D @ u) if self.x_hat is None else y
            self._integrate(output - r, u, wanted)
        if self.x_hat is not None:
            innovation = y - self._C @ self.x_hat - self._D @ u
            self.x_hat = self.x_hat + self.T * (self._A @ self.x_hat + self._B @ u + self.L @ innovation)
        self.u_last = u
        return u.copy()

    def _integrate(self, error, u, wanted):
        if self.ANTI_WINDUP == "back_calculation":
            correction = numpy.linalg.pinv(self.Ki) @ (u - wanted) / self.tracking_time
            self.q = self.q + self.T * (error - correction)
            return
        q_next = self.q + self.T * error
        if self.saturated.any():
            push = -self.Ki @ (q_next - self.q)  # change of u the integration would cause
            outward = numpy.sign(wanted - u)  # direction in which each clipped input is held
            if numpy.any(self.saturated & (push * outward > 0)):
                return  # conditional integration: hold q while it would drive further into the limit
        self.q = q_next
'''


def controller_class(design: Design, printer) -> str:
    """The text of the ``Controller`` class (and its plant-matrix helper) for the module."""
    model = design.model
    names = {p.name: mangle(p.name, PYTHON_RESERVED) for p in model.parameters}
    constants = constant_parameters(model)
    variable = [p for p in model.parameters if p.name not in constants]
    fns = {(f.part, f.key): f for f in design_functions(design)}
    free = sorted({a for f in fns.values() for a in f.arguments if a not in names})
    for a in free:
        names[a] = mangle(a, PYTHON_RESERVED)
    limits = model.extra.get("input_limits", {})
    mins = [_number(model, getattr(limits.get(u), "min", None), "-numpy.inf") for u in model.inputs]
    maxs = [_number(model, getattr(limits.get(u), "max", None), "numpy.inf") for u in model.inputs]
    rates = [_number(model, getattr(limits.get(u), "rate", None), "numpy.inf") for u in model.inputs]
    integral_table = model.extra.get("integral_options", {})
    anti_windup = integral_table.get("anti_windup", "clamp")
    tracking = integral_table.get("tracking_time")
    estimator = design.estimator is not None
    n_out = model.n_outputs if model.C is not None else model.n_states
    kw = [f"{names[p.name]}={p.nominal!r}" for p in variable] + [f"{names[a]}=0.0" for a in free]
    call = ", ".join([f"{names[p.name]}={names[p.name]}" for p in model.parameters])
    lines = [*_plant_function(design, printer, names), "", "",
             "class Controller:",
             f'    """Sampled controller of {model.name}: u = -K x_hat - Ki q + N r, clipped to the actuator limits.',
             "",
             "    Built from the closed-form gains of this module. T is the sample period in seconds; the",
             "    continuous design is emulated at T (estimator and integrator advanced by forward Euler).",
             "    Keyword arguments: the parameters (defaults: nominal values)"
             + (", and free gains left by the target (default 0)" if free else "") + ".",
             f"    step(y) takes {'the measured outputs ' + str(list(model.outputs)) if estimator else 'the full state ' + str(list(model.states))}.",
             "    Validate in simulation and on the machine with safe limits before use.",
             '    """',
             "",
             f"    PARAMETERS = {tuple(names[p.name] for p in variable) + tuple(names[a] for a in free)!r}",
             f"    NOMINAL = {{{', '.join(f'{names[p.name]!r}: {p.nominal!r}' for p in variable)}}}",
             f"    CONSTANTS = {{{', '.join(f'{names[k]!r}: {v!r}' for k, v in constants.items())}}}",
             f"    SIGNS = {{{', '.join(f'{names[p.name]!r}: {p.sign!r}' for p in variable)}}}",
             f"    RANGES = {{{', '.join(f'{names[p.name]!r}: {p.range!r}' for p in variable if p.range)}}}",
             f"    INPUT_MIN = numpy.array([{', '.join(mins)}])",
             f"    INPUT_MAX = numpy.array([{', '.join(maxs)}])",
             f"    INPUT_RATE = numpy.array([{', '.join(rates)}])",
             f"    ANTI_WINDUP = {anti_windup!r}",
             "",
             f"    def __init__(self, T, *, {', '.join(kw)}):" if kw else "    def __init__(self, T):",
             "        T = float(T)",
             "        if not T > 0.0 or not numpy.isfinite(T):",
             '            raise ValueError(f"Controller: the sample period T = {T} must be a positive number")',
             "        self.T = T",
             "        self._values = {}",
             f"        self._measured = {model.n_outputs if estimator else model.n_states}",
             f"        self._outputs = {n_out}",
             f"        self.tracking_time = {tracking!r}" if tracking is not None else "        self.tracking_time = None",
             f"        self.set_parameters({', '.join(f'{v}={v}' for v in [names[p.name] for p in variable] + [names[a] for a in free])})",
             "        self.reset()",
             "",
             "    def set_parameters(self, **values):",
             '        """New parameter values (for example a payload change); recomputes every gain."""',
             "        for name, value in values.items():",
             "            if name not in self.PARAMETERS:",
             '                raise ValueError(f"Controller: unknown parameter {name!r}; expected one of {self.PARAMETERS}")',
             "            value = float(value)",
             "            sign = self.SIGNS.get(name)",
             "            if sign == 'positive' and not value > 0 or sign == 'nonnegative' and not value >= 0 \\",
             "                    or sign == 'nonzero' and value == 0 or not numpy.isfinite(value):",
             '                raise ValueError(f"Controller: {name} = {value:g} must be {sign}")',
             "            low, high = self.RANGES.get(name, (-numpy.inf, numpy.inf))",
             "            if not low <= value <= high:",
             '                raise ValueError(f"Controller: {name} = {value:g} lies outside its declared range [{low:g}, {high:g}]")',
             "        merged = {**self._values, **{k: float(v) for k, v in values.items()}}",
             "        p = {**self.CONSTANTS, **merged}"]
    gain_args = lambda f: ", ".join(f"{names[a]}=p[{names[a]!r}]" for a in f.arguments)  # noqa: E731
    if design.integral is not None:
        fk, fki = fns[("integral", "gain")], fns[("integral", "integral_gain")]
        lines += [f"        K = {fk.name}({gain_args(fk)})", f"        Ki = {fki.name}({gain_args(fki)})"]
    elif design.feedback is not None:
        fk = fns[("feedback", "gain")]
        lines += [f"        K = {fk.name}({gain_args(fk)})", "        Ki = None"]
    else:
        lines += [f"        K = numpy.zeros(({model.n_inputs}, {model.n_states}))", "        Ki = None"]
    if design.estimator is not None:
        fl = fns[("estimator", "gain")]
        lines.append(f"        L = {fl.name}({gain_args(fl)})")
    else:
        lines.append("        L = None")
    if design.feedforward is not None:
        fn = fns[("feedforward", "gain")]
        lines.append(f"        N = {fn.name}({gain_args(fn)})")
    else:
        lines.append("        N = None")
    pargs = ", ".join(f"{names[p.name]}=p[{names[p.name]!r}]" for p in model.parameters)
    lines += [f"        self._A, self._B, self._C, self._D = _plant_matrices({pargs})",
              "        self.K, self.Ki, self.L, self.N = K, Ki, L, N",
              "        if self.Ki is not None and self.ANTI_WINDUP == 'back_calculation' and self.tracking_time is None:",
              "            poles = numpy.linalg.eigvals(self._A - self._B @ self.K)",
              "            self.tracking_time = 1.0 / max(numpy.min(numpy.abs(poles.real)), 1e-12)",
              "        self._values = merged",
              "",
              "    def reset(self):",
              '        """Zero the estimator state, the integrator state and the last input."""',
              f"        self.x_hat = numpy.zeros({model.n_states}) if self.L is not None else None",
              f"        self.q = numpy.zeros({n_out}) if self.Ki is not None else None",
              f"        self.u_last = numpy.zeros({model.n_inputs})",
              f"        self.saturated = numpy.zeros({model.n_inputs}, dtype=bool)"]
    del call
    return "\n".join(lines) + "\n" + _STEP
