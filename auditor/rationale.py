"""Wording: the sentences a report carries. Computes nothing."""

from __future__ import annotations

CAUTION = (
    "This audit supports, and does not replace, a pre-registered analysis plan and qualified"
    " statistical advice. Magnitude labels are conventions; weigh them against the effects"
    " reported in your own field's literature."
)
