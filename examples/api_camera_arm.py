"""A camera boom held at an angle, built in Python from its equation of motion.

A motor at the pivot swings a camera boom (mass m at distance l, viscous loss b) and must
hold it at the angle theta0 from hanging straight down. The holding torque is not given:
"solve" finds it (m*g*l*sin(theta0)), and the model is linearized there. The script
derives the angle-loop gains and checks them against scipy.
Invented machine, invented numbers. Run: python examples/api_camera_arm.py
"""
import sympy as sp

from symgain import check_design, derive, model_from_equations


def build_model():
    theta, omega, tau = sp.symbols("theta omega tau")
    m, g, l, b, w = sp.symbols("m g l b w", positive=True)
    return model_from_equations(
        "camera_boom",
        equations={theta: omega, omega: (tau - m * g * l * sp.sin(theta) - b * omega) / (m * l**2)},
        equilibrium={theta: "theta0", omega: 0, tau: "solve"},
        outputs=["theta"],
        parameters={
            "m": {"sign": "positive", "range": [0.8, 2.0], "unit": "kg", "meaning": "camera and boom"},
            "g": {"sign": "positive", "range": [9.81, 9.81], "unit": "m/s^2", "meaning": "gravity"},
            "l": {"sign": "positive", "range": [0.4, 0.9], "unit": "m", "meaning": "pivot to centre of mass"},
            "b": {"sign": "nonnegative", "range": [0.01, 0.1], "unit": "N*m*s/rad", "meaning": "pivot loss"},
            "theta0": {"sign": "real", "range": [0.2, 1.2], "unit": "rad", "meaning": "holding angle"},
            "w": {"sign": "positive", "range": [2, 8], "role": "design", "meaning": "closed-loop bandwidth"},
        },
        feedback={"damping": "0.7", "natural_frequency": w},
        title="Camera boom held at an angle (Python API)")


def main():
    model = build_model()
    print("holding torque:", model.extra["equilibrium"]["tau"])
    design = derive(model)
    for name, value in zip(model.states, design.feedback.gain):
        print(f"K[{name}] =", value)
    report = check_design(design, n_points=10)
    print("check passed" if report.passed else "check FAILED")
    return 0 if report.passed else 1


if __name__ == "__main__":
    raise SystemExit(main())
