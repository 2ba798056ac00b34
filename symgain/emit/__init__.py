"""Emitters: one module per output language, each reading a :class:`~symgain.design.Design`."""
