"""auditor: screen group comparisons and report effect sizes side by side, with intervals.

The statistics stack (numpy, scipy, pandas, pingouin) is imported only when an audit runs, so
that `auditor --help` answers at once.
"""

from __future__ import annotations

__version__ = "0.1.0"
__all__ = ["audit", "__version__"]


def __getattr__(name: str):
    if name == "audit":
        from auditor.pipeline import audit

        return audit
    raise AttributeError(f"module 'auditor' has no attribute {name!r}")
