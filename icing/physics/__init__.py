"""The physics of the chain, each quantity in one function with its published source.

Thermodynamics (:mod:`.thermo`), the moist adiabat (:mod:`.adiabat`), cloud and supercooled layers
(:mod:`.layers`), liquid water and droplet size (:mod:`.microphysics`), the level-wise diagnosis of profiles
(:mod:`.diagnose`), ice accretion on a reference body (:mod:`.accretion`) and the certification envelopes
(:mod:`.envelopes`). Modules here import only each other (downwards) and :mod:`icing.units`/:mod:`icing.errors`.
"""
