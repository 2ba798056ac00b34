"""The telescope focus drive of dc_motor_position.toml, built in Python from sympy matrices.

A brushed DC motor with winding inductance L_a drives the focuser (three states: angle, rate,
winding current; input: voltage). This script builds the model without any file, derives
the position-loop gains, checks them against scipy and prints the JSON result.
Invented machine, invented numbers. Run: python examples/api_dc_motor.py
"""
import sympy as sp

from symgain import check_design, derive, design_to_json, model_from_matrices


def build_model():
    J, b, K, R, L, w = sp.symbols("J b K_t R L_a w", positive=True)
    A = sp.Matrix([[0, 1, 0],
                   [0, -b / J, K / J],
                   [0, -K / L, -R / L]])
    B = sp.Matrix([0, 0, 1 / L])
    return model_from_matrices(
        "focus_drive", A, B, C=sp.Matrix([[1, 0, 0]]),
        states=["angle", "rate", "current"], inputs=["voltage"], outputs=["angle"],
        parameters={
            "J": {"sign": "positive", "range": [2e-6, 8e-6], "unit": "kg*m^2", "meaning": "rotor and gear inertia"},
            "b": {"sign": "nonnegative", "range": [1e-6, 5e-6], "unit": "N*m*s/rad", "meaning": "viscous friction"},
            "K_t": {"sign": "positive", "range": [0.01, 0.03], "unit": "N*m/A", "meaning": "torque constant"},
            "R": {"sign": "positive", "range": [2, 6], "unit": "ohm", "meaning": "winding resistance"},
            "L_a": {"sign": "positive", "range": [0.5e-3, 2e-3], "unit": "H", "meaning": "winding inductance"},
            "w": {"sign": "positive", "range": [20, 80], "role": "design", "meaning": "closed-loop bandwidth"},
        },
        feedback={"poles": [-w, -2 * w, -3 * w]},
        title="Telescope focus drive (Python API)")


def main():
    design = derive(build_model())
    report = check_design(design, n_points=10)
    print(design_to_json(design))
    print("check passed" if report.passed else "check FAILED")
    return 0 if report.passed else 1


if __name__ == "__main__":
    raise SystemExit(main())
