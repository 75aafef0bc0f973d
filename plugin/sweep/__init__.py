"""Sweeps from the UI: a small form (up to three numbers of the set-up and their values) run on the
sweep engine of :mod:`heatsoak.core.app.sweep`, its table filled as variants finish."""
