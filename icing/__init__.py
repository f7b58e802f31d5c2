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
    "diagnose": "icing.diagnose",
    "supercooled_layers": "icing.layers",
    "cloud_layers": "icing.layers",
    "freezing_levels": "icing.layers",
    "collision_efficiency": "icing.accretion",
    "freezing_fraction": "icing.accretion",
    "accretion_rate": "icing.accretion",
    "icing_intensity": "icing.accretion",
    "get_aircraft": "icing.aircraft",
    "Aircraft": "icing.aircraft",
    "read_route": "icing.route",
    "Route": "icing.route",
    "SoundingSource": "icing.sources",
    "assess_route": "icing.assess",
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
