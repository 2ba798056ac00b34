"""symgain."""
