"""Closed-loop simulation: scenarios, actuator limits, parameter mismatch and requirements."""
