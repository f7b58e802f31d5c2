"""Contingency tables, the standard verification measures of yes/no and multi-category forecasts, and the
reliability of probability forecasts.

Formulas as in Wilks, D. S. (2011), *Statistical Methods in the Atmospheric Sciences*, 3rd ed., Academic
Press, chapter 8, "Forecast verification" (section numbers from memory): the 2x2 table and its measures
(section 8.2); the multi-category table with the Heidke and Peirce skill scores and the Gerrity score
(section 8.3, after Gerrity 1992, Mon. Wea. Rev. 120, 2709-2712); the Brier score, its decomposition
(Murphy 1973, J. Appl. Meteor. 12, 595-600) and the reliability diagram (section 8.4). The same measures are
in Jolliffe and Stephenson (2012), *Forecast Verification*, 2nd ed., Wiley, chapters 3 and 4.

The 2x2 table: a hits (forecast yes, observed yes), b false alarms (forecast yes, observed no), c misses
(forecast no, observed yes), d correct negatives. A measure whose denominator is zero is undefined: NaN,
never 0.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["ContingencyTable", "contingency_table", "multicategory_table", "multicategory_scores",
           "gerrity_weights", "reliability_table", "brier_score", "plot_reliability"]


def _ratio(num, den):
    num, den = float(num), float(den)
    return num / den if den != 0 else float("nan")


@dataclass(frozen=True)
class ContingencyTable:
    """A 2x2 contingency table of yes/no forecasts: ``a`` hits, ``b`` false alarms, ``c`` misses, ``d`` correct
    negatives (Wilks 2011, Fig. 8.1a)."""

    a: int
    b: int
    c: int
    d: int

    def __post_init__(self):
        for name in "abcd":
            v = getattr(self, name)
            if not (float(v) >= 0 and float(v) == int(v)):
                raise ValueError(f"contingency table count {name} must be a whole number >= 0, not {v!r}")

    @property
    def n(self) -> int:
        return int(self.a + self.b + self.c + self.d)

    @property
    def pod(self) -> float:
        """Probability of detection (hit rate), a/(a+c) (Wilks 2011, section 8.2)."""
        return _ratio(self.a, self.a + self.c)

    @property
    def far(self) -> float:
        """False-alarm ratio, b/(a+b) (Wilks 2011, section 8.2)."""
        return _ratio(self.b, self.a + self.b)

    @property
    def pofd(self) -> float:
        """Probability of false detection (false-alarm rate), b/(b+d) (Wilks 2011, section 8.2)."""
        return _ratio(self.b, self.b + self.d)

    @property
    def csi(self) -> float:
        """Critical success index (threat score), a/(a+b+c) (Wilks 2011, section 8.2)."""
        return _ratio(self.a, self.a + self.b + self.c)

    @property
    def tss(self) -> float:
        """True skill statistic (Peirce skill score, Hanssen-Kuipers discriminant), a/(a+c) - b/(b+d)
        (Wilks 2011, section 8.2): POD - POFD."""
        return self.pod - self.pofd

    @property
    def bias(self) -> float:
        """Frequency bias, (a+b)/(a+c) (Wilks 2011, section 8.2)."""
        return _ratio(self.a + self.b, self.a + self.c)

    @property
    def proportion_correct(self) -> float:
        """(a+d)/n (Wilks 2011, section 8.2)."""
        return _ratio(self.a + self.d, self.n)

    @property
    def hss(self) -> float:
        """Heidke skill score, 2(ad - bc) / [(a+c)(c+d) + (a+b)(b+d)] (Wilks 2011, section 8.2)."""
        a, b, c, d = (float(x) for x in (self.a, self.b, self.c, self.d))
        return _ratio(2.0 * (a * d - b * c), (a + c) * (c + d) + (a + b) * (b + d))

    def scores(self) -> dict:
        """The counts and every measure, as a dict (NaN where undefined)."""
        return {"hits": int(self.a), "false_alarms": int(self.b), "misses": int(self.c),
                "correct_negatives": int(self.d), "n": self.n, "pod": self.pod, "far": self.far, "pofd": self.pofd,
                "csi": self.csi, "tss": self.tss, "hss": self.hss, "bias": self.bias,
                "proportion_correct": self.proportion_correct}

    def to_frame(self):
        """The table as a 2x2 DataFrame: rows forecast yes/no, columns observed yes/no."""
        import pandas as pd

        return pd.DataFrame([[self.a, self.b], [self.c, self.d]],
                            index=pd.Index(["yes", "no"], name="forecast"),
                            columns=pd.Index(["yes", "no"], name="observed"))


def contingency_table(observed, forecast) -> ContingencyTable:
    """The 2x2 table of paired yes/no observations and forecasts (booleans; pairs where either is missing,
    None or NaN, are not counted)."""
    o = _bool_array(observed)
    f = _bool_array(forecast)
    if o.shape != f.shape:
        raise ValueError(f"observed and forecast differ in length: {o.size} and {f.size}")
    ok = ~np.isnan(o) & ~np.isnan(f)
    o, f = o[ok] > 0.5, f[ok] > 0.5
    return ContingencyTable(int(np.sum(f & o)), int(np.sum(f & ~o)), int(np.sum(~f & o)), int(np.sum(~f & ~o)))


def _bool_array(values):
    """Booleans (with None, NaN or pandas NA for missing) as floats 1/0/NaN."""
    out = []
    for v in list(values):
        if v is None or (isinstance(v, float) and np.isnan(v)):
            out.append(np.nan)
            continue
        try:
            out.append(1.0 if bool(v) else 0.0)
        except TypeError:  # pandas NA
            out.append(np.nan)
    return np.asarray(out, dtype=float)


# ---------------------------------------------------------------------------------------------- multi-category
def multicategory_table(observed, forecast, categories):
    """The K x K table of counts: rows the forecast category, columns the observed one, in the order of
    ``categories`` (Wilks 2011, Fig. 8.1b). Pairs where either is missing are not counted; a value outside
    ``categories`` raises ``ValueError``."""
    import pandas as pd

    cats = list(categories)
    index = {c: i for i, c in enumerate(cats)}
    table = np.zeros((len(cats), len(cats)), dtype=np.int64)
    for o, f in zip(list(observed), list(forecast), strict=True):
        if _missing(o) or _missing(f):
            continue
        if o not in index or f not in index:
            raise ValueError(f"category {o if o not in index else f!r} is not one of {cats}")
        table[index[f], index[o]] += 1
    return pd.DataFrame(table, index=pd.Index(cats, name="forecast"), columns=pd.Index(cats, name="observed"))


def _missing(v):
    if v is None:
        return True
    try:
        return bool(v != v)  # NaN and pandas NA
    except TypeError:
        return True


def gerrity_weights(observed_frequencies):
    """Scoring weights s_ij of the Gerrity score for K ordered categories from the observed relative
    frequencies p(o_1) ... p(o_K) (Gerrity 1992; Wilks 2011, section 8.3)::

        a_i = (1 - sum_{r<=i} p(o_r)) / sum_{r<=i} p(o_r)
        s_ii = [sum_{r<i} 1/a_r + sum_{r>=i}^{K-1} a_r] / (K - 1)
        s_ij = [sum_{r<i} 1/a_r - (j - i) + sum_{r>=j}^{K-1} a_r] / (K - 1),  i < j;  s_ji = s_ij

    NaN weights where a category at either end was never observed (an a_i of 0 or infinity).
    """
    p = np.asarray(observed_frequencies, dtype=float)
    k = p.size
    if k < 2:
        raise ValueError("the Gerrity score needs at least two categories")
    cum = np.cumsum(p)[:-1]
    with np.errstate(divide="ignore", invalid="ignore"):
        a = (1.0 - cum) / cum
        inv = 1.0 / a
    if not (np.all(np.isfinite(a)) and np.all(np.isfinite(inv))):
        return np.full((k, k), np.nan)
    s = np.zeros((k, k))
    for i in range(k):  # 0-based: sum over r < i of 1/a_r and over r >= j (up to K-2) of a_r
        for j in range(i, k):
            s[i, j] = (inv[:i].sum() - (j - i) + a[j:].sum()) / (k - 1)
            s[j, i] = s[i, j]
    return s


def multicategory_scores(table) -> dict:
    """Measures of a K x K table (rows forecast, columns observed; counts): ``proportion_correct``, the
    Heidke skill score ``hss``, the Peirce skill score ``pss`` and the Gerrity score ``gerrity``
    (Wilks 2011, section 8.3):

    .. math:: HSS = \\frac{\\sum_i p(y_i,o_i) - \\sum_i p(y_i)p(o_i)}{1 - \\sum_i p(y_i)p(o_i)},\\quad
              PSS = \\frac{\\sum_i p(y_i,o_i) - \\sum_i p(y_i)p(o_i)}{1 - \\sum_i p(o_i)^2},\\quad
              GS = \\sum_i\\sum_j p(y_i,o_j)\\, s_{ij}

    For two categories PSS and GS equal the true skill statistic of the 2x2 table (Gerrity 1992). NaN where
    undefined (no pairs, one observed category only, a category at an end never observed for GS).
    """
    t = np.asarray(table, dtype=float)
    if t.ndim != 2 or t.shape[0] != t.shape[1]:
        raise ValueError(f"a multi-category table is square, not of shape {t.shape}")
    n = t.sum()
    nan = float("nan")
    if n == 0:
        return {"n": 0, "proportion_correct": nan, "hss": nan, "pss": nan, "gerrity": nan}
    p = t / n
    py, po = p.sum(axis=1), p.sum(axis=0)
    pc = float(np.trace(p))
    chance = float(np.sum(py * po))
    gs = float(np.sum(p * gerrity_weights(po)))
    return {"n": int(n), "proportion_correct": pc, "hss": _ratio(pc - chance, 1.0 - chance),
            "pss": _ratio(pc - chance, 1.0 - float(np.sum(po ** 2))), "gerrity": gs}


# ---------------------------------------------------------------------------------------------- probabilities
def brier_score(probability, observed) -> float:
    """Mean squared difference of probability forecasts and outcomes (1 yes, 0 no) (Wilks 2011, section 8.2);
    pairs with a missing value are left out; NaN without pairs."""
    f = np.asarray(probability, dtype=float)
    o = _bool_array(observed)
    ok = np.isfinite(f) & ~np.isnan(o)
    return float(np.mean((f[ok] - o[ok]) ** 2)) if ok.any() else float("nan")


def reliability_table(probability, observed, bins=10):
    """Observed relative frequency per forecast-probability bin: the points of a reliability diagram
    (Wilks 2011, section 8.4.4).

    Parameters
    ----------
    probability : array_like of float in [0, 1]
        The forecast probability (a ``p_*`` share); NaN is left out.
    observed : array_like of bool
        Whether the event was observed; missing (None, NaN, NA) is left out.
    bins : int or array_like
        A number of equal bins on [0, 1], or the bin edges. Each bin holds lower <= p < upper, the last also
        p = upper.

    Returns
    -------
    pandas.DataFrame, one row a bin: ``lower``, ``upper``, ``count``, ``mean_probability`` (mean forecast in the
    bin), ``observed_frequency`` (NaN for an empty bin). ``attrs`` hold ``brier`` and the decomposition
    ``reliability``, ``resolution``, ``uncertainty`` of Murphy (1973) over these bins (Wilks 2011, section 8.2),
    with ``brier = reliability - resolution + uncertainty`` exactly when every forecast in a bin has the same
    value, and ``base_rate``, ``n``.
    """
    import pandas as pd

    f = np.asarray(probability, dtype=float)
    o = _bool_array(observed)
    if f.shape != o.shape:
        raise ValueError(f"probability and observed differ in length: {f.size} and {o.size}")
    if np.any((f < 0) | (f > 1)):
        raise ValueError("forecast probabilities must lie in [0, 1]")
    edges = np.linspace(0.0, 1.0, int(bins) + 1) if np.ndim(bins) == 0 else np.asarray(bins, dtype=float)
    if edges.size < 2 or np.any(np.diff(edges) <= 0):
        raise ValueError("bin edges must increase")
    ok = np.isfinite(f) & ~np.isnan(o)
    f, o = f[ok], o[ok]
    idx = np.clip(np.searchsorted(edges, f, side="right") - 1, 0, edges.size - 2)
    nb = edges.size - 1
    count = np.bincount(idx, minlength=nb).astype(float)
    with np.errstate(invalid="ignore", divide="ignore"):
        mean_f = np.bincount(idx, weights=f, minlength=nb) / count
        freq = np.bincount(idx, weights=o, minlength=nb) / count
    frame = pd.DataFrame({"lower": edges[:-1], "upper": edges[1:], "count": count.astype(np.int64),
                          "mean_probability": mean_f, "observed_frequency": freq})
    n = f.size
    nan = float("nan")
    if n:
        obar = float(o.mean())
        used = count > 0
        rel = float(np.sum(count[used] * (mean_f[used] - freq[used]) ** 2) / n)
        res = float(np.sum(count[used] * (freq[used] - obar) ** 2) / n)
        frame.attrs.update(n=n, base_rate=obar, brier=float(np.mean((f - o) ** 2)), reliability=rel,
                           resolution=res, uncertainty=obar * (1.0 - obar))
    else:
        frame.attrs.update(n=0, base_rate=nan, brier=nan, reliability=nan, resolution=nan, uncertainty=nan)
    return frame


def plot_reliability(tables, ax=None):
    """A reliability diagram: observed frequency against mean forecast probability per bin, one line per
    table (a dict ``{label: reliability_table(...)}`` or one table), with the diagonal of perfect reliability.
    Returns the matplotlib Axes."""
    import matplotlib.pyplot as plt

    if ax is None:
        _, ax = plt.subplots(figsize=(5, 5))
    if not isinstance(tables, dict):
        tables = {"": tables}
    ax.plot([0, 1], [0, 1], color="0.6", lw=1, ls="--", label="perfect reliability")
    for label, t in tables.items():
        used = t["count"] > 0
        ax.plot(t["mean_probability"][used], t["observed_frequency"][used], marker="o", label=label or None)
    ax.set_xlim(0, 1)
    ax.set_ylim(0, 1)
    ax.set_xlabel("forecast probability")
    ax.set_ylabel("observed relative frequency")
    ax.legend(loc="upper left", fontsize="small")
    return ax
