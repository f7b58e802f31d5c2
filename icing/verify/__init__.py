"""Verification of the icing diagnosis against pilot reports.

* :mod:`icing.verify.pireps`: reading pilot reports in the encoded ``UA``/``UUA`` form;
* :mod:`icing.verify.scores`: contingency tables, the standard verification measures and reliability;
* :mod:`icing.verify.match`: matching reports to an atmosphere source (:func:`verify_reports`).

ADVISORY ONLY: a verification of this tool's guidance says how it did on past cases; it is no certification.
The public names are imported on first use, so ``import icing.verify`` stays light.
"""

from __future__ import annotations

import importlib

_EXPORTS = {
    "PirepFormatError": "icing.verify.pireps",
    "parse_pirep": "icing.verify.pireps",
    "parse_pireps": "icing.verify.pireps",
    "read_pireps": "icing.verify.pireps",
    "read_waypoints": "icing.verify.pireps",
    "ContingencyTable": "icing.verify.scores",
    "contingency_table": "icing.verify.scores",
    "multicategory_table": "icing.verify.scores",
    "multicategory_scores": "icing.verify.scores",
    "gerrity_weights": "icing.verify.scores",
    "reliability_table": "icing.verify.scores",
    "brier_score": "icing.verify.scores",
    "verify_reports": "icing.verify.match",
    "Verification": "icing.verify.match",
}

__all__ = list(_EXPORTS)


def __getattr__(name):
    module = _EXPORTS.get(name)
    if module is None:
        raise AttributeError(f"module 'icing.verify' has no attribute {name!r}")
    return getattr(importlib.import_module(module), name)


def __dir__():
    return sorted(__all__)
