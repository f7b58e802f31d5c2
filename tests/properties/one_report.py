"""One constructed sounding report and a source over it, shared by the property tests of the route scorer and of
the departure window (constructed values, not a check value: a cold, moist low layer under dry air aloft)."""

import numpy as np

from icing.flight.sources import SoundingSource
from icing.profile import build_profile

P = np.array([1000.0, 900.0, 800.0, 700.0, 600.0, 500.0, 400.0, 300.0])
T = np.array([4.0, -3.0, -8.0, -13.0, -19.0, -26.0, -36.0, -48.0])
DD = np.array([3.0, 0.2, 0.2, 0.3, 12.0, 20.0, 20.0, 20.0])
# Used up to 250 km and 6 h away: routes and windows around it reach past the data.
SOURCE = SoundingSource([build_profile(P, T, dewpoint=T - DD, station="Q1", latitude=50.0, longitude=-20.0,
                                       elevation=0.0, time="2026-01-15T06:00Z")], max_distance_km=250.0,
                        max_age_hours=6.0)
