"""Example models shipped with symgain."""
