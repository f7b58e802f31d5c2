"""icing: screen a planned flight route for airframe icing from upper-air soundings.

ADVISORY ONLY. The results are a planning aid, not a certified forecast. Defer to official aviation weather
products, the aircraft's approved flight manual and ice-protection procedures, and local regulations.

The public names are imported on first use, so ``import icing`` stays light.
"""

from __future__ import annotations

import importlib

__version__ = "0.1.0"

CAUTION = (
    "ADVISORY ONLY: computed icing guidance for planning, not a certified forecast. Defer to official aviation "
    "weather products (forecasts, advisories and pilot reports), the aircraft's approved flight manual and "
    "ice-protection procedures, the operator's approved procedures and local regulations."
)

_EXPORTS = {
    "read_sounding": "icing.io",
    "read_profiles": "icing.io",
    "read_soundings": "icing.io",
    "build_profile": "icing.profile",
    "stack_profiles": "icing.profile",
    "diagnose": "icing.physics.diagnose",
    "supercooled_layers": "icing.physics.layers",
    "cloud_layers": "icing.physics.layers",
    "freezing_levels": "icing.physics.layers",
    "collision_efficiency": "icing.physics.accretion",
    "freezing_fraction": "icing.physics.accretion",
    "accretion_rate": "icing.physics.accretion",
    "icing_intensity": "icing.physics.accretion",
    "get_aircraft": "icing.flight.aircraft",
    "Aircraft": "icing.flight.aircraft",
    "read_route": "icing.flight.route",
    "Route": "icing.flight.route",
    "SoundingSource": "icing.flight.sources",
    "assess_route": "icing.flight.assess",
    "screen_departures": "icing.flight.departures",
    "ModelEnsemble": "icing.flight.spread",
    "read_pireps": "icing.verify.pireps",
    "verify_reports": "icing.verify.match",
    "units": "icing.units",
    "ureg": "icing.units",
}

__all__ = ["CAUTION", "__version__", *_EXPORTS]


def __getattr__(name):
    module = _EXPORTS.get(name)
    if module is None:
        raise AttributeError(f"module 'icing' has no attribute {name!r}")
    if name == "units":
        return importlib.import_module(module).ureg
    return getattr(importlib.import_module(module), name)


def __dir__():
    return sorted(__all__)
