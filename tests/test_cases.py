"""End-to-end cases: routes screened through soundings that stand for published situations (issue 14).

Each profile is constructed from the situation a paper or the trade describes (the source is named in each
test); the checks are on what a dispatcher reads: the intensity word, the large drops and why, the LWC.
"""

import numpy as np
import pytest

from icing.flight.aircraft import PRESETS, get_aircraft
from icing.flight.assess import INTENSITIES, assess_route
from icing.flight.route import Route
from icing.flight.sources import SoundingSource
from icing.physics import envelopes, microphysics
from icing.profile import build_profile
from icing.units import FT

P_HPA = np.arange(1000.0, 299.0, -25.0)
DEPARTURE = "2026-01-15T06:00Z"


def _profile(nodes_p, nodes_t, moist, station, lat, lon, dry=10.0, cloud_liquid=None):
    """Levels every 25 hPa, temperature piecewise linear in ln p through the nodes, saturated (0.1 K dewpoint
    depression) between the pressures of ``moist`` and ``dry`` K drier elsewhere."""
    x = -np.log(P_HPA)
    t = np.interp(x, -np.log(np.asarray(nodes_p, float)), np.asarray(nodes_t, float))
    inside = (P_HPA <= moist[0]) & (P_HPA >= moist[1])
    td = np.where(inside, t - 0.1, t - dry)
    kw = {} if cloud_liquid is None else {"cloud_liquid": np.where(inside, cloud_liquid, 0.0)}
    return build_profile(P_HPA, t, dewpoint=td, station=station, latitude=lat, longitude=lon, elevation=0.0,
                         time="2026-01-15T06:00Z", **kw)


def _source(nodes, moist, dry=10.0, cloud_liquid=None, **options):
    """The same sounding at two stations on either side of the route (complete data all along)."""
    return SoundingSource([_profile(*nodes, moist, "C1", 50.0, -20.0, dry, cloud_liquid),
                           _profile(*nodes, moist, "C2", 50.5, -18.0, dry, cloud_liquid)], **options)


def _level_route(altitude_ft):
    return Route.from_points([("AAA", 50.1, -19.8, altitude_ft), ("BBB", 50.4, -18.2, altitude_ft)],
                             departure=DEPARTURE)


def _word(seg, row=0):
    return str(seg.loc[row, "intensity"])


def _rank(word):
    return INTENSITIES.index(word)


# The stratiform deck of issue 14: 0 degC at the ground, saturated from about 800 to 3,500 m, -5 to -23 degC in
# the deck (pressures of those heights in the standard atmosphere).
DECK = ([1000, 921, 657, 500, 300], [0.0, -5.0, -23.0, -35.0, -55.0])
DECK_MOIST = (921.0, 657.0)


def test_stratiform_deck_reads_light_to_moderate_with_measured_lwc():
    """An ordinary supercooled stratiform deck. Measured in flight, thick supercooled layers average about
    0.14 g/m3 (Korolev et al. 2007, Q. J. R. Meteorol. Soc. 133, 1693-1699, from the abstract); from a sounding
    alone the chain's LWC is uncertain by a factor of two, so the deck's median LWC must lie within 0.07-0.28
    g/m3 and below the Appendix C continuous maximum. Flown at 8,000 ft by the certified presets it reads light
    or moderate (AIM: moderate is what ice protection still controls), never severe, with no large drops (the
    deck's top is -23 degC: it snows, and no warm layer melts the snow)."""
    source = _source(DECK, DECK_MOIST)
    d = source.diagnostics
    deck = d["in_cloud"].values[0] & d["supercooled"].values[0]
    assert deck.sum() >= 8
    assert 0.07 <= float(np.median(d["lwc"].values[0][deck])) <= 0.28
    deck &= d["lwc"].values[0] > 0  # (the base level holds no liquid yet)
    lwc = d["lwc"].values[0][deck]
    # (the continuous maximum is drawn for MVD 15-40 um; a smaller MVD is held to its 15 um value, the
    # lowest of the figure's limits at any drop size: a stricter comparison)
    mvd = np.clip(d["mvd"].values[0][deck], 15.0, 40.0)
    cm = envelopes.continuous_max_lwc_si(mvd, d["temperature"].values[0][deck])
    assert (lwc < cm).all()
    for name in ("turboprop", "regional-jet"):
        seg = assess_route(_level_route(8000.0), source, name).segments
        assert seg.loc[0, "data"] == "ok" and seg.loc[0, "icing_minutes"] > 0
        assert _word(seg) in ("light", "moderate"), name
        assert seg.loc[0, "large_drops"] == "none" and seg.loc[0, "large_drop_potential"] == "none"


def _continuous_max_lwc(t_c, airmass="supercooled"):
    """The LWC (g/m3) that sits on the 14 CFR 25 Appendix C continuous maximum at the MVD the chain gives it
    (the fixed point of LWC = CM(MVD(LWC), T))."""
    lwc = 0.5
    for _ in range(80):
        mvd = float(microphysics.median_volume_diameter(lwc * 1e-3, airmass)) * 1e6
        lwc = 0.5 * lwc + 0.5 * float(envelopes.continuous_max_lwc_si(mvd, t_c))
    return lwc


@pytest.mark.parametrize("t_deck", [-5.0, -10.0, -20.0])
def test_at_the_appendix_c_continuous_maximum_certified_presets_read_at_most_moderate(t_deck):
    """Cloud water given at 98 % of the continuous maximum of 14 CFR Part 25 Appendix C (Figure 1) for the
    deck's temperature and the MVD the chain gives it: the ice protection of an aircraft certified for icing is
    designed for these conditions (14 CFR 25.1419), so no certified preset reads severe (AIM: severe is what ice
    protection cannot control), and each reads at least light. A preset not certified for icing is told so."""
    nodes = ([1000, 900, 800, 700, 500, 300], [t_deck + 6.0, t_deck + 1.0, t_deck, t_deck - 1.0, -30.0, -55.0])
    lwc = 0.98 * _continuous_max_lwc(t_deck)
    source = _source(nodes, (850.0, 750.0), cloud_liquid=lwc)
    alt = float(np.interp(800.0, P_HPA[::-1], source.profiles["height"].values[0][::-1])) / FT
    for name in PRESETS:
        ac = get_aircraft(name)
        res = assess_route(_level_route(alt), source, ac)
        seg = res.segments
        assert seg.loc[0, "appendix_c"] == "within", name
        if ac.icing_certified:
            assert _rank("light") <= _rank(_word(seg)) <= _rank("moderate"), (name, t_deck, _word(seg))
        else:
            assert any("not certified" in n for n in res.summary["notes"])


# Freezing rain: snow from a deck melts in a warm nose (+3 degC at 850 hPa) and falls into a cold surface layer
# (-4 degC at the ground): Bourgouin (2000) gives freezing rain for a cold area below 46 + 0.66 PA.
WARM_NOSE = ([1000, 900, 850, 800, 700, 600, 500, 300], [-4.0, 0.0, 3.0, 0.0, -8.0, -15.0, -23.0, -50.0])


def test_freezing_rain_sounding():
    """Under the warm nose the drops are supercooled rain (Bourgouin 2000; Cober et al. 2001 measured such
    melted-and-supercooled environments): a route at 1,000 ft in the cold layer reads rain likely, for the
    reason that snow melted aloft, and at least moderate for every preset (beyond Appendix C: large drops)."""
    source = _source(WARM_NOSE, (775.0, 450.0), dry=5.0)
    assert int(source.diagnostics["precipitation_type"].values[0]) in (3, 5)
    for name in PRESETS:
        seg = assess_route(_level_route(1000.0), source, name).segments
        assert seg.loc[0, "large_drops"] == "rain" and seg.loc[0, "large_drop_potential"] == "likely"
        assert seg.loc[0, "large_drop_reason"].startswith("snow melted")
        assert _rank(_word(seg)) >= _rank("moderate"), name


def test_ice_pellet_sounding():
    """A shallow warm nose (+1 degC, about 200 m) over a deep cold layer (-5 degC over 1.9 km): Bourgouin
    (2000) gives ice pellets (cold area far above 66 + 0.66 PA), so near the ground the drops have refrozen and
    a route at 1,000 ft meets no supercooled rain, while just under the nose they may still be liquid."""
    nodes = ([1000, 825, 800, 785, 700, 600, 500, 300], [-5.0, -5.0, 1.0, 0.0, -8.0, -15.0, -23.0, -50.0])
    source = _source(nodes, (700.0, 450.0), dry=5.0)
    assert int(source.diagnostics["precipitation_type"].values[0]) == 4
    seg = assess_route(_level_route(1000.0), source, "turboprop").segments
    assert seg.loc[0, "large_drops"] == "none"


def test_warm_topped_drizzle_deck():
    """The deck of Cober, Isaac and Strapp (1996, J. Appl. Meteor. 35, 2250-2260): about 1,100 m deep, -7.5 to
    -12 degC, 21 droplets per cm3, drizzle grown by collision-coalescence. Flown through with that droplet
    number, the route reads freezing drizzle possible (the -12 degC top is colder than the -10 degC of Huffman
    and Norman 1988) by the warm-rain process, and at least moderate (beyond Appendix C: large drops)."""
    nodes = ([1000, 850, 750, 600, 300], [-1.0, -7.5, -12.0, -20.0, -50.0])
    source = _source(nodes, (850.0, 750.0), dry=5.0, airmass=21)
    alt = float(np.interp(800.0, P_HPA[::-1], source.profiles["height"].values[0][::-1])) / FT
    seg = assess_route(_level_route(alt), source, "turboprop").segments
    assert seg.loc[0, "large_drops"] == "drizzle" and seg.loc[0, "large_drop_potential"] == "possible"
    assert seg.loc[0, "large_drop_reason"].startswith("warm-rain process")
    assert _rank(_word(seg)) >= _rank("moderate")


@pytest.mark.parametrize("altitude_ft", [1000.0, 5000.0, 9000.0])
def test_dry_column_with_a_warm_nose_has_no_ice_and_no_large_drops(altitude_ft):
    """A warm nose over cold air with no cloud anywhere (dewpoint 15 K below the temperature): nothing falls, so
    nothing melts or refreezes (Bourgouin 2000 types falling precipitation only) and nothing ices: 'none' with
    complete data at every altitude, never unknown."""
    source = _source(WARM_NOSE, (0.0, 0.0), dry=15.0)
    seg = assess_route(_level_route(altitude_ft), source, "turboprop").segments
    assert seg.loc[0, "data"] == "ok"
    assert _word(seg) == "none" and seg.loc[0, "large_drops"] == "none"
    assert seg.loc[0, "large_drop_potential"] == "none"
