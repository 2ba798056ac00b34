"""The analysis stage: numbers about a ``Design`` (numpy, scipy), apart from the symbolic core.

| module | holds |
| --- | --- |
| ``check`` | numeric cross-check against scipy at sampled parameter points |
| ``robust`` | closed-loop stability when the plant's parameters differ from the controller's |
| ``sensitivity`` | relative sensitivities and partial derivatives of the gains |
| ``evaluate`` | vectorized numeric gain functions (shared by schedules and checks) |
| ``schedule`` | gains over a grid of parameters |
| ``step_response`` | closed-loop step responses at the nominal point and the corners |
"""
