"""Helpers shared by the reference-check modules."""

from __future__ import annotations

import warnings

import pandas as pd


def quiet_pingouin(fn, *args, **kwargs):
    """Call pingouin with pandas' deprecation notices about pingouin's own code silenced."""
    with warnings.catch_warnings():
        warnings.filterwarnings("ignore", category=pd.errors.Pandas4Warning)
        return fn(*args, **kwargs)
