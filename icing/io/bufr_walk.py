"""Walk the decoded data of one BUFR message by descriptor: header elements, then each delayed replication.

ecCodes (the reference BUFR library, used through its Python bindings) decodes the message; this module only
follows the order of the data elements it reports (its key iterator: ``#rank#name`` per element, ``subsetNumber``
at the start of each subset, ``operator`` at a 2 22 000 / 2 23 000 ... operator) and groups the elements that
follow a delayed replication factor (0 31 001, 0 31 002, ...) into repetitions. A repetition of a block that
holds pressure or height together with temperature, humidity or wind is one level of a sounding; a block of
wind shear (0 11 061 / 0 11 062, sequence 3 03 051) or any other block is kept apart, so that no block is
assumed to have as many values as another.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

__all__ = ["Block", "Subset", "message_subsets", "FACTOR_NAMES", "LEVEL_NAMES"]

# Delayed replication and repetition factors (class 31), as ecCodes names them.
FACTOR_NAMES = {"delayedDescriptorReplicationFactor", "extendedDelayedDescriptorReplicationFactor",
                "shortDelayedDescriptorReplicationFactor", "delayedDescriptorAndDataRepetitionFactor",
                "extendedDelayedDescriptorAndDataRepetitionFactor", "shortDelayedDescriptorAndDataRepetitionFactor"}
# Elements that may belong to one level of a radiosonde sequence (3 03 014, 3 03 051, 3 03 054, 3 03 056 ...);
# a block repeated once ends at the first element not in this set.
LEVEL_NAMES = {"timePeriod", "extendedVerticalSoundingSignificance", "verticalSoundingSignificance", "pressure",
               "nonCoordinateGeopotentialHeight", "geopotentialHeight", "nonCoordinateGeopotential", "geopotential",
               "height", "heightOfSensorAboveGroundOrWaterSurface", "latitudeDisplacement", "longitudeDisplacement",
               "latitude", "longitude", "airTemperature", "dewpointTemperature", "relativeHumidity",
               "mixingRatio", "windDirection", "windSpeed", "absoluteWindShearIn1KmLayerBelow",
               "absoluteWindShearIn1KmLayerAbove", "hour", "minute", "second", "u", "v", "w",
               "verticalSignificanceSurfaceObservations"}
VERTICAL_NAMES = {"pressure", "nonCoordinateGeopotentialHeight", "geopotentialHeight", "nonCoordinateGeopotential",
                  "geopotential"}
PROFILE_NAMES = {"airTemperature", "dewpointTemperature", "relativeHumidity", "windDirection", "windSpeed"}
SHEAR_NAMES = {"absoluteWindShearIn1KmLayerBelow", "absoluteWindShearIn1KmLayerAbove"}


@dataclass
class Block:
    """One delayed replication: its factor and its repetitions, each a dict name -> rank."""

    factor: int
    names: tuple
    reps: list = field(default_factory=list)
    note: str = ""

    @property
    def kind(self):
        """``levels`` (vertical coordinate with temperature, humidity or wind), ``wind_shear`` or ``other``."""
        names = set(self.names)
        if names & SHEAR_NAMES:
            return "wind_shear"
        if names & VERTICAL_NAMES and names & PROFILE_NAMES:
            return "levels"
        return "other"


@dataclass
class Subset:
    """The elements of one subset: header ranks (first occurrence of each name) and replication blocks."""

    number: int
    header: dict
    blocks: list
    trailer: list  # names after an operator (quality information, substituted values ...), not used as data


def _split(keys):
    """Element keys of the data section as (name, rank), split by subset (uncompressed: one per subset).

    The data section starts at the first ranked key (``#1#...``) or at ``subsetNumber``; keys of sections 0-3
    (edition, centre, typical date ...) come before it and are not elements.
    """
    subsets, current = [], None
    for key in keys:
        if key == "subsetNumber":  # starts each subset of an uncompressed message
            current = []
            subsets.append(current)
            continue
        if current is None and key.startswith("#"):  # a compressed message has no subsetNumber key
            current = []
            subsets.append(current)
        if current is None or "->" in key:
            continue
        if key.startswith("#"):
            _, rank, name = key.split("#", 2)
            current.append((name, int(rank)))
        else:
            current.append((key, 0))
    return subsets


def _walk(elements, factor_value, number):
    """Header, blocks and trailer of one subset from its (name, rank) elements in data order."""
    header, blocks, trailer = {}, [], []
    i, n = 0, len(elements)
    while i < n:
        name, rank = elements[i]
        if name == "operator":
            trailer = sorted({nm for nm, _ in elements[i + 1:] if nm != "operator"})
            break
        if name in FACTOR_NAMES:
            count = factor_value(name, rank)
            block, i = _replication(elements, i + 1, count)
            if block is not None:
                blocks.append(block)
            continue
        header.setdefault(name, rank)
        i += 1
    return Subset(number, header, blocks, trailer)


def _replication(elements, start, count):
    """The block of ``count`` repetitions starting at ``start``; returns (block or None, next index)."""
    n = len(elements)
    if count <= 0 or start >= n:
        return None, start
    leader = elements[start][0]
    if leader in FACTOR_NAMES or leader == "operator":
        return None, start
    # The first repetition runs to the leader's return, or (repeated once) to the first element that cannot
    # belong to a level; a nested factor or an operator ends it too.
    j, seen = start + 1, {leader}
    while j < n:
        name = elements[j][0]
        if name == leader or name in FACTOR_NAMES or name == "operator" or name in seen:
            break
        if count == 1 and name not in LEVEL_NAMES:
            break
        seen.add(name)
        j += 1
    names = tuple(nm for nm, _ in elements[start:j])
    size = len(names)
    block = Block(count, names)
    k = start
    for r in range(count):
        chunk = elements[k:k + size]
        if len(chunk) < size or tuple(nm for nm, _ in chunk) != names:
            block.note = (f"replication of {count} expected, {r} found with the elements "
                          f"{', '.join(names)}; the rest of the subset is not read as levels")
            return block, k
        block.reps.append({nm: rk for nm, rk in chunk})
        k += size
    return block, k


def message_subsets(ec, h, nsub, compressed):
    """The subsets of an unpacked message as :class:`Subset` records, plus a value getter.

    The getter ``value(name, rank, subset)`` returns the float value (NaN where missing) of the element of that
    rank in that subset (0-based); ``text(name, rank, subset)`` the stripped string of a character element.
    """
    it = ec.codes_bufr_keys_iterator_new(h)
    keys = []
    try:
        while ec.codes_bufr_keys_iterator_next(it):
            keys.append(ec.codes_bufr_keys_iterator_get_name(it))
    finally:
        ec.codes_bufr_keys_iterator_delete(it)
    values = _Values(ec, h, nsub, compressed)
    per_subset = _split(keys)
    if compressed:
        # One structure for all subsets (compression needs equal expansions); values per subset.
        elements = per_subset[0] if per_subset else []
        out = []
        for s in range(nsub):
            out.append(_walk(elements, lambda nm, rk, s=s: _count(values.value(nm, rk, s)), s + 1))
        return out, values
    out = [_walk(elements, lambda nm, rk: _count(values.value(nm, rk, 0)), s + 1)
           for s, elements in enumerate(per_subset)]
    return out, values


def _count(v):
    return int(v) if np.isfinite(v) else 0


class _Values:
    """Values of ranked elements: whole arrays per name (uncompressed) or per rank (compressed), cached."""

    def __init__(self, ec, h, nsub, compressed):
        self.ec, self.h, self.nsub, self.compressed = ec, h, nsub, compressed
        self.cache = {}

    def _missing(self, v):
        ec = self.ec
        v = np.asarray(v, dtype=float)
        bad = (v == ec.CODES_MISSING_DOUBLE) | (v == ec.CODES_MISSING_LONG) | (np.abs(v) >= 1e99)
        return np.where(bad, np.nan, v)

    def value(self, name, rank, subset):
        ec = self.ec
        if self.compressed:
            key = f"#{rank}#{name}" if rank else name
            arr = self.cache.get(key)
            if arr is None:
                try:
                    arr = self._missing(ec.codes_get_double_array(self.h, key))
                except ec.GribInternalError:
                    arr = np.array([np.nan])
                self.cache[key] = arr
            return float(arr[subset] if arr.size > subset else arr[0])
        arr = self.cache.get(name)
        if arr is None:
            try:
                arr = self._missing(ec.codes_get_double_array(self.h, name))
            except ec.GribInternalError:
                arr = np.zeros(0)
            self.cache[name] = arr
        if rank and rank <= arr.size:
            return float(arr[rank - 1])
        key = f"#{rank}#{name}" if rank else name
        try:
            return float(self._missing(ec.codes_get_double(self.h, key)))
        except ec.GribInternalError:
            return float("nan")

    def text(self, name, rank, subset):
        ec = self.ec
        key = f"#{rank}#{name}" if rank else name
        try:
            if self.compressed:
                arr = ec.codes_get_string_array(self.h, key)
                s = arr[subset] if len(arr) > subset else arr[0]
            else:
                s = ec.codes_get_string(self.h, key)
        except ec.GribInternalError:
            return ""
        s = str(s).strip()
        return "" if not s or set(s) <= {"\xff"} else s
