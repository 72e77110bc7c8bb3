"""Acquisitions over time: the validated scenario content (spec), the plan pipeline and
the channel timeline with its Monte Carlo."""
