"""The ``Controller`` class of the emitted Python module: the controller that runs at period T.

One sample (``step``) does, in this order: the current-form estimate (when
asked), u = -K x - Ki q + N r, saturation to [min, max] and to the rate limit,
the integrator update with anti-windup, and the estimator update with the
applied (clipped) u. A sampled-data design uses its own Phi, Gamma, K, L, Ki,
N; a continuous design is emulated at T: the estimator and the integrator are
advanced by forward Euler (x_hat += T (A x_hat + B u + L (y - C x_hat - D u)),
q += T (y - r)).

The class is built only from matrices the design holds, each computed by a
function of the same module (``feedback_gain``, ``plant_Phi``, ...), so the
validity conditions raise ``ValueError`` there. This module writes text; it
derives nothing.

>>> import sympy as sp
>>> from symgain.model import Model, Parameter, TargetSpec
>>> from symgain.design import derive
>>> from symgain.emit.python import python_module
>>> m = Parameter.declare("m", sign="positive", range=(1, 2))
>>> model = Model(name="cart", parameters=(m,), states=("p", "v"), inputs=("F",),
...               A=sp.Matrix([[0, 1], [0, 0]]), B=sp.Matrix([[0], [1 / m.symbol]]),
...               feedback=TargetSpec("poles", {"poles": (-1, -1)}))
>>> namespace = {}
>>> exec(python_module(derive(model)), namespace)
>>> ctl = namespace["Controller"](T=0.01, m=2.0)
>>> ctl.step([1.0, 0.0]).tolist()
[-2.0]
"""
from __future__ import annotations

import sympy as sp

from ..design import Design
from .common import PYTHON_RESERVED, Function, discriminants, mangle, sample_period

__all__ = ["controller_functions", "controller_class", "controller_blocker", "CONTROLLER_DOC"]

CONTROLLER_DOC = ("Controller(T=..., <parameters>): the controller that runs at sample period T "
                  "(step, set_parameters, reset)")


def _condition_exprs(conds):
    return tuple(c.lhs - c.rhs if c.rhs != 0 else c.lhs for c in conds)


def controller_blocker(design: Design) -> str | None:
    """Why no controller can be written for this design (None when it can)."""
    parts = design.parts()
    if not parts or (design.feedback is None and design.integral is None):
        return "the design has no feedback gain"
    for part in parts:
        if part.free_gains or part.gain.has(sp.nan) or "branches" in part.extra:
            return f"the {part.part} gain is not unique (free gains or branches)"
    if design.sampled is not None and design.model.sampling.estimator_form == "current" \
            and design.model.D is not None and not sp.Matrix(design.model.D).is_zero_matrix:
        return "the current-form estimator is written for D = 0"
    return None


def controller_functions(design: Design) -> list[Function]:
    """Plant matrices and actuator limits that the controller needs, as module functions."""
    model = design.model
    params = tuple(p.name for p in model.parameters)
    meanings = tuple((p.name, p.meaning, p.unit, p.range) for p in model.parameters)
    out = []

    def add(name, part, label, matrix, conds=(), infinite_ok=False):
        out.append(Function(name, part, "matrix", label, sp.ImmutableMatrix(matrix), params,
                            _condition_exprs(conds), meanings, infinite_ok=infinite_ok, period=sample_period(design),
                            nonnegative=discriminants(matrix) if design.sampled is not None else ()))

    if design.sampled is not None:
        add("plant_Phi", "sampled plant", "Phi", design.sampled.Phi, design.sampled.valid_when)
        add("plant_Gamma", "sampled plant", "Gamma", design.sampled.Gamma, design.sampled.valid_when)
    else:
        add("plant_A", "plant", "A", model.A)
        add("plant_B", "plant", "B", model.B)
    if model.C is not None:
        add("plant_C", "plant", "C", model.C)
        D = model.D if model.D is not None else sp.zeros(model.n_outputs, model.n_inputs)
        add("plant_D", "plant", "D", D)
    limits = {name: (lo, hi, rate) for name, lo, hi, rate in model.input_limits}
    rows = [[], [], []]
    for name in model.inputs:
        lo, hi, rate = limits.get(name, (None, None, None))
        rows[0].append(-sp.oo if lo is None else lo)
        rows[1].append(sp.oo if hi is None else hi)
        rows[2].append(sp.oo if rate is None else rate)
    add("input_limits", "actuator", "U", sp.Matrix(rows), infinite_ok=True)  # no limit: +-inf
    aw = model.anti_windup or {}
    if design.integral is not None and aw.get("tracking_time") is not None:
        add("tracking_time", "anti-windup", "TT", sp.Matrix([[aw["tracking_time"]]]))
    return out


def _param_table(design: Design, names: dict[str, str]) -> list[str]:
    lines = ["    PARAMETERS = {  # name: (nominal, sign, range)"]
    for p in design.model.parameters:
        rng = None if p.range is None else (float(p.range[0]), float(p.range[1]))
        lines.append(f"        {names[p.name]!r}: ({p.nominal!r}, {p.sign!r}, {rng!r}),")
    lines.append("    }")
    return lines


def _sample_period(design: Design, names: dict[str, str]):
    """(keyword for T, parameter name of T or None, numeric T or None)."""
    model = design.model
    keyword = "T"
    period = design.sampled.period if design.sampled is not None else None
    pname = str(period) if period is not None and not period.is_number else None
    if "T" in names.values() and pname != "T":
        keyword = "T_sample"  # a plant parameter is already called T
    fixed = float(period) if period is not None and period.is_number else None
    if pname is not None:
        pname = names[pname]
    del model
    return keyword, pname, fixed


_BODY = '''
    def __init__(self, {kw}=None, *, check_ranges=True, **parameters):
        self.check_ranges = bool(check_ranges)  # False: run outside the declared ranges (signs still hold)
        unknown = sorted(set(parameters) - set(self.PARAMETERS))
        if unknown:
            raise ValueError(f"unknown parameter {{unknown[0]!r}}; expected {{', '.join(self.PARAMETERS)}}")
        if self.FIXED_PERIOD is not None:
            if {kw} is not None and abs({kw} - self.FIXED_PERIOD) > 1e-12 * self.FIXED_PERIOD:
                raise ValueError(f"the design was made for {kw} = {{self.FIXED_PERIOD}} s, not {{{kw}}}")
            {kw} = self.FIXED_PERIOD
        elif {kw} is None and self.PERIOD_PARAMETER is not None:
            {kw} = parameters.get(self.PERIOD_PARAMETER, self.PARAMETERS[self.PERIOD_PARAMETER][0])
        if {kw} is None:
            raise ValueError("give the sample period {kw} (seconds)")
        self.T = float({kw})
        if not self.T > 0:
            raise ValueError(f"the sample period must be positive, found {{self.T}}")
        self.parameters = {{name: spec[0] for name, spec in self.PARAMETERS.items()}}
        if self.PERIOD_PARAMETER is not None:
            parameters[self.PERIOD_PARAMETER] = self.T
        self.set_parameters(**parameters)
        self.reset()

    def set_parameters(self, **changes):
        """Change parameters (a payload change at run time) and recompute every gain; states are kept."""
        values = dict(self.parameters)
        for name, value in changes.items():
            if name not in self.PARAMETERS:
                raise ValueError(f"unknown parameter {{name!r}}")
            if self.PERIOD_PARAMETER == name and abs(float(value) - self.T) > 1e-12 * self.T:
                raise ValueError(f"{{name}} is the sample period; make a new Controller to change it")
            values[name] = float(value)
        for name, value in values.items():
            _, sign, rng = self.PARAMETERS[name]
            if value is None:
                raise ValueError(f"parameter {{name}} has no nominal value; give it")
            if (sign == "positive" and not value > 0 or sign == "nonnegative" and not value >= 0
                    or sign == "nonzero" and value == 0):
                raise ValueError(f"{{name}} = {{value}} contradicts its declared sign ({{sign}})")
            if self.check_ranges and rng is not None and not rng[0] <= value <= rng[1]:
                raise ValueError(f"{{name}} = {{value}} lies outside its declared range [{{rng[0]}}, {{rng[1]}}]; "
                                 "pass check_ranges=False to run outside it")
        m = {{}}
        for key, function in self._MATRICES.items():
            m[key] = None if function is None else numpy.asarray(function(**values, check_ranges=self.check_ranges),
                                                                  dtype=numpy.float64)
        self.parameters = values
        self.K, self.Ki, self.L, self.N = m["K"], m["Ki"], m["L"], m["N"]
        self.A, self.B, self.C, self.D = m["A"], m["B"], m["C"], m["D"]
        limits = m["U"]
        self.u_min, self.u_max, self.rate = limits[0], limits[1], limits[2]
        self.tracking_time = self._tracking_time(values)

    def _tracking_time(self, values):
        if self.Ki is None:
            return None
        if self.TRACKING_TIME is not None:
            return float(self.TRACKING_TIME(**values))
        return 10.0 * self.T  # default: ten sample periods

    def reset(self):
        """Zero the estimator state, the integrator state and the last input."""
        n, m = self.N_STATES, self.N_INPUTS
        self.x_hat = numpy.zeros(n) if self.L is not None else None
        self.q = numpy.zeros(self.Ki.shape[1]) if self.Ki is not None else None
        self.u_last = numpy.zeros(m)
        self.u_held = numpy.zeros(m) if self.DELAY else None
        self.saturated = numpy.zeros(m, dtype=bool)

    def step(self, y, r=None):
        """One sample: measured y (outputs with an estimator, else the full state) and reference r -> u."""
        y = numpy.asarray(y, dtype=numpy.float64).reshape(-1)
        width = self.N_OUTPUTS if self.L is not None else self.N_STATES
        if y.shape[0] != width:
            raise ValueError(f"y must hold {{width}} values, found {{y.shape[0]}}")
        p = self.N_OUTPUTS
        r = numpy.zeros(p) if r is None else numpy.asarray(r, dtype=numpy.float64).reshape(-1)
        if self.L is not None and self.CURRENT_FORM:
            self.x_hat = self.x_hat + self.L @ (y - self.C @ self.x_hat)
        x = self.x_hat if self.L is not None else y
        v = self.u_held if self.DELAY else self.u_last  # the input that acts during this sample
        if self.DELAY:  # one sample of computation delay: the gain also acts on u[k-1]
            x = numpy.concatenate([x, v])
        u_want = -self.K @ x
        if self.Ki is not None:
            u_want = u_want - self.Ki @ self.q
        if self.N is not None and r.shape[0]:
            u_want = u_want + self.N @ r
        u = numpy.clip(u_want, self.u_min, self.u_max)
        step_limit = self.rate * self.T
        u = numpy.clip(u, v - step_limit, v + step_limit)
        self.saturated = u != u_want
        u_new = u
        if self.Ki is not None:
            measured = y if self.L is not None else self.C @ y + self.D @ (v if self.DELAY else u)
            e = measured - r
            if self.ANTI_WINDUP == "back_calculation":
                correction = numpy.linalg.pinv(self.Ki) @ (u - u_want) / self.tracking_time
                self.q = self.q + self.T * (e - correction)
            else:
                push = -self.Ki @ (self.T * e)
                high = self.saturated & (u_want > u)
                low = self.saturated & (u_want < u)
                if not numpy.any(high & (push > 0) | low & (push < 0)):
                    self.q = self.q + self.T * e
        if self.L is not None:
            xh, L, C, D = self.x_hat, self.L, self.C, self.D
            if self.DELAY:  # the estimator is driven by the input that acts during this sample
                u = v
            if self.CURRENT_FORM:
                self.x_hat = self.A @ xh + self.B @ u
            elif self.DISCRETE:
                self.x_hat = self.A @ xh + self.B @ u + L @ (y - C @ xh - D @ u)
            else:
                self.x_hat = xh + self.T * (self.A @ xh + self.B @ u + L @ (y - C @ xh - D @ u))
        if self.DELAY:  # hold the new input; apply the one computed at the previous sample
            self.u_held, u = u_new, v
        self.u_last = u
        return u.copy()
'''


def controller_class(design: Design, printer, names: dict[str, str]) -> list[str]:
    """The text of ``class Controller`` (uses the module's gain and plant functions)."""
    model = design.model
    kw, pname, fixed = _sample_period(design, names)
    discrete = design.sampled is not None
    K_part = design.integral if design.integral is not None else design.feedback
    K_fn = "integral_state_gain" if design.integral is not None else "feedback_gain"
    matrices = {
        "K": K_fn, "Ki": "integral_gain" if design.integral is not None else None,
        "L": "estimator_gain" if design.estimator is not None else None,
        "N": "feedforward_gain" if design.feedforward is not None else None,
        "A": "plant_Phi" if discrete else "plant_A", "B": "plant_Gamma" if discrete else "plant_B",
        "C": "plant_C" if model.C is not None else None, "D": "plant_D" if model.C is not None else None,
        "U": "input_limits",
    }
    del K_part
    aw = model.anti_windup or {"method": "clamp", "tracking_time": None}
    tt = aw.get("tracking_time")
    form = model.sampling.estimator_form if discrete else "prediction"
    kind = ("sampled-data design" + (f" at T = {fixed:g} s" if fixed else "")) if discrete else \
        "continuous design emulated at T (estimator and integrator by forward Euler)"
    lines = ["", "", "class Controller:",
             f'    """The controller of {model.name} that runs at a sample period T ({kind}).',
             "",
             f"    Controller({kw}=..., <parameters as keywords; defaults are the nominal values>);",
             "    a parameter outside its declared range is refused (ValueError) unless check_ranges=False;",
             "    step(y, r=None) -> u, set_parameters(**changes), reset().",
             "    Law per sample: u = -K x_hat - Ki q + N r, clipped to [u_min, u_max] and to rate * T per",
             f"    sample; integrator q += T (y - r) with anti-windup ({aw['method']}); estimator "
             f"({form} form) advanced with the applied u.",
             *(["    Computation delay: step() returns the input computed at the previous sample (apply it now);",
                "    the one computed from this y is held in u_held and returned by the next step()."]
               if discrete and model.sampling.compute_delay else []),
             "    Gains from a linear model must be validated in simulation and on the machine with safe limits;",
             "    local codes, safety standards and licensed practice take precedence.",
             '    """', ""]
    lines += _param_table(design, names)
    lines += [f"    FIXED_PERIOD = {fixed!r}",
              f"    PERIOD_PARAMETER = {pname!r}",
              f"    DISCRETE = {discrete!r}",
              f"    CURRENT_FORM = {form == 'current' and design.estimator is not None!r}",
              f"    ANTI_WINDUP = {aw['method']!r}",
              f"    DELAY = {bool(discrete and model.sampling.compute_delay)!r}  # one sample of computation delay",
              f"    N_STATES, N_INPUTS, N_OUTPUTS = {model.n_states}, {model.n_inputs}, {model.n_outputs}"]
    if tt is None:
        lines.append("    TRACKING_TIME = None  # default: ten sample periods")
    else:
        args = ", ".join(names[p.name] for p in model.parameters)
        rename = {p.symbol: sp.Symbol(names[p.name]) for p in model.parameters}
        lines.append(f"    TRACKING_TIME = staticmethod(lambda {args + ', ' if args else ''}**_: "
                     f"{printer.doprint(sp.sympify(tt).xreplace(rename))})")
    lines.append("    _MATRICES = {" + ", ".join(f"{k!r}: {v if v else 'None'}" for k, v in matrices.items()) + "}")
    lines += _BODY.format(kw=kw).split("\n")
    return lines


def keyword_names(design: Design) -> dict[str, str]:
    """Model parameter name -> keyword used in the emitted module."""
    return {p.name: mangle(p.name, PYTHON_RESERVED) for p in design.model.parameters}
