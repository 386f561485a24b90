"""Harmonic voltage and current distortion limits (IEEE Std 519) and THD / TDD.

The limit tables are module-level data with their citation markers, copied
from REFERENCES.md "Voltage and current distortion".  Look-ups return limits;
comparing a result with them is the caller's business (an exceedance is a
negative margin, never an exception).
"""

from __future__ import annotations

from dataclasses import dataclass
from types import MappingProxyType
from typing import Mapping, NamedTuple

import numpy as np

from resonance.errors import InputError

__all__ = [
    "IEEE519_EDITIONS",
    "VoltageLimitRow",
    "VOLTAGE_LIMIT_ROWS",
    "CurrentLimitRow",
    "CURRENT_LIMIT_ROWS",
    "ORDER_RANGE_EDGES",
    "EVEN_ORDER_RULES",
    "VoltageLimits",
    "CurrentLimits",
    "ieee519_voltage_limits",
    "ieee519_current_limits",
    "thd_pct",
    "tdd_pct",
]

#: Editions of IEEE Std 519 this module knows.  Table values are the same in
#: both; the even-order rule differs (see :func:`ieee519_current_limits`).
IEEE519_EDITIONS = ("2014", "2022")


class VoltageLimitRow(NamedTuple):
    """One row of the bus-voltage distortion table.

    Attributes
    ----------
    v_max_kv : float
        Upper edge of the row, included; ``inf`` for the last row [kV].
    label : str
        Row heading [unitless].
    individual_pct : float
        Limit on each individual harmonic [% of nominal fundamental voltage].
    thd_pct : float
        Limit on total harmonic distortion [% of nominal fundamental voltage].
    source : str
        Citation marker for the row's values [unitless].
    """

    v_max_kv: float
    label: str
    individual_pct: float
    thd_pct: float
    source: str


#: IEEE Std 519-2014 (values unchanged in 2022), voltage distortion limits at
#: the PCC, line-to-neutral, % of nominal fundamental voltage; harmonics to the 50th.
#: Edges: V <= 1 kV | 1 < V <= 69 kV | 69 < V <= 161 kV | V > 161 kV.
VOLTAGE_LIMIT_ROWS: tuple[VoltageLimitRow, ...] = (
    VoltageLimitRow(1.0, "V <= 1 kV", 5.0, 8.0, "[published]"),
    VoltageLimitRow(69.0, "1 kV < V <= 69 kV", 3.0, 5.0,
                    "[memory, consistent with the 1992 5 % THD / 3 % individual rule]"),
    VoltageLimitRow(161.0, "69 kV < V <= 161 kV", 1.5, 2.5, "[memory]"),
    VoltageLimitRow(float("inf"), "V > 161 kV", 1.0, 1.5, "[memory]"),
)


class CurrentLimitRow(NamedTuple):
    """One row of the current distortion table (systems 120 V to 69 kV).

    Attributes
    ----------
    r_min : float
        Lower edge of ``I_sc / I_L``, included (0 for the first row) [unitless].
    label : str
        Row heading [unitless].
    odd_pct : tuple of float
        Limits for odd orders in the ranges of :data:`ORDER_RANGE_EDGES`
        [% of I_L].
    tdd_pct : float
        Limit on total demand distortion [% of I_L].
    source : str
        Citation marker for the row's values [unitless].
    """

    r_min: float
    label: str
    odd_pct: tuple[float, float, float, float, float]
    tdd_pct: float
    source: str


_TABLE_SOURCE = "[published, 1992 table = 2014]"

#: IEEE Std 519-2014 current distortion limits for systems rated 120 V to 69 kV,
#: % of I_L (maximum demand load current), odd orders.  Row convention: a row
#: covers ``r_min <= I_sc/I_L < r_min of the next row`` (common practice).
CURRENT_LIMIT_ROWS: tuple[CurrentLimitRow, ...] = (
    CurrentLimitRow(0.0, "<20", (4.0, 2.0, 1.5, 0.6, 0.3), 5.0, _TABLE_SOURCE),
    CurrentLimitRow(20.0, "20-50", (7.0, 3.5, 2.5, 1.0, 0.5), 8.0, _TABLE_SOURCE),
    CurrentLimitRow(50.0, "50-100", (10.0, 4.5, 4.0, 1.5, 0.7), 12.0, _TABLE_SOURCE),
    CurrentLimitRow(100.0, "100-1000", (12.0, 5.5, 5.0, 2.0, 1.0), 15.0, _TABLE_SOURCE),
    CurrentLimitRow(1000.0, ">1000", (15.0, 7.0, 6.0, 2.5, 1.4), 20.0, _TABLE_SOURCE),
)

#: Order ranges of the current table: 3 <= h < 11, 11 <= h < 17, 17 <= h < 23,
#: 23 <= h < 35, 35 <= h <= 50.  The inner edges (lower edge included);
#: orders 2 and up to 50 are limited.  [published]
ORDER_RANGE_EDGES = (11.0, 17.0, 23.0, 35.0)
_H_MIN_LIMITED = 2
_H_MAX_LIMITED = 50

#: Even-order limits as a fraction of the odd limit of the same range, per
#: edition: ``(bands, text)`` with bands ``(h_upper_included, factor)`` in
#: rising order.  2014: 25 % for every even order [published];
#: 2022: 50 % for h <= 6, 100 % above [published].
EVEN_ORDER_RULES: Mapping[str, tuple[tuple[tuple[float, float], ...], str]] = MappingProxyType({
    "2014": (((50.0, 0.25),),
             "even orders at 25 % of the odd limit of their range [published]"),
    "2022": (((6.0, 0.5), (50.0, 1.0)),
             "even orders at 50 % of the odd limit for h <= 6, 100 % above [published]"),
})


class VoltageLimits(NamedTuple):
    """Voltage distortion limits at one bus voltage.

    Attributes
    ----------
    individual_pct : float
        Limit on each individual harmonic [% of nominal fundamental voltage].
    thd_pct : float
        Limit on THD [% of nominal fundamental voltage].
    source : str
        Edition, table row and citation marker [unitless].
    """

    individual_pct: float
    thd_pct: float
    source: str


@dataclass(frozen=True, eq=False)
class CurrentLimits:
    """Current distortion limits for one short-circuit ratio and a set of orders.

    Attributes
    ----------
    h : ndarray
        The orders asked for [unitless].
    individual_pct : ndarray
        Limit at each order where ``limited`` is True; 0.0 elsewhere
        (meaningless there) [% of I_L].
    limited : ndarray of bool
        True for integer orders 2..50, the orders the table covers [unitless].
    tdd_pct : float
        Limit on TDD [% of I_L].
    row : str
        Label of the table row used [unitless].
    edition : str
        IEEE Std 519 edition [unitless].
    source : str
        Citation of the table, the row convention and the even-order rule
        [unitless].
    """

    h: np.ndarray
    individual_pct: np.ndarray
    limited: np.ndarray
    tdd_pct: float
    row: str
    edition: str
    source: str


def _edition(edition: object, file: str) -> str:
    ed = str(edition)
    if ed not in IEEE519_EDITIONS:
        valid = ", ".join(repr(e) for e in IEEE519_EDITIONS)
        raise InputError.single(file, "study.ieee519_edition",
                                f"unknown IEEE Std 519 edition {edition!r}; choose one of {valid}")
    return ed


def ieee519_voltage_limits(v_kv: float, edition: str = "2014", *, file: str = "<input>") -> VoltageLimits:
    """Voltage distortion limits for a bus of nominal voltage ``v_kv``.

    Parameters
    ----------
    v_kv : float
        Nominal line-to-line voltage of the bus (the PCC) [kV].
    edition : str, optional
        ``"2014"`` or ``"2022"`` [unitless].
    file : str, optional
        Input file, for the error message [unitless].

    Returns
    -------
    VoltageLimits
        ``(individual_pct, thd_pct, source)``: limits [% of nominal
        fundamental voltage] and the citation of the row used [unitless].

    Raises
    ------
    InputError
        Unknown edition (field ``study.ieee519_edition``).
    ValueError
        ``v_kv`` not finite and > 0.

    Notes
    -----
    Rows: ``V <= 1 kV``, ``1 < V <= 69 kV``, ``69 < V <= 161 kV``, ``V > 161 kV``
    (upper edge included).  The limits apply to line-to-neutral voltages in
    percent of nominal, harmonics to the 50th.

    References
    ----------
    IEEE Std 519-2014, *Recommended Practice and Requirements for Harmonic
    Control in Electric Power Systems*, clause 5.1, Table 1 (voltage
    distortion limits); values unchanged in IEEE Std 519-2022.  Markers per
    row: REFERENCES.md, "Voltage and current distortion".
    """
    ed = _edition(edition, file)
    v = float(v_kv)
    if not np.isfinite(v) or v <= 0.0:
        raise ValueError(f"v_kv must be finite and > 0, got {v_kv!r}")
    row = next(r for r in VOLTAGE_LIMIT_ROWS if v <= r.v_max_kv)
    return VoltageLimits(row.individual_pct, row.thd_pct,
                         f"IEEE Std 519-{ed} Table 1, row {row.label} {row.source}")


def ieee519_current_limits(isc_over_il: float, h: np.ndarray, edition: str = "2014",
                           *, file: str = "<input>") -> CurrentLimits:
    """Current distortion limits at the PCC for a short-circuit ratio and orders.

    Parameters
    ----------
    isc_over_il : float
        Ratio of the maximum short-circuit current at the PCC to the maximum
        demand load current ``I_L`` [unitless].
    h : array_like
        Harmonic orders to look up [unitless].
    edition : str, optional
        ``"2014"`` or ``"2022"`` (they differ in the even-order rule) [unitless].
    file : str, optional
        Input file, for the error message [unitless].

    Returns
    -------
    CurrentLimits
        Individual limits per order with the ``limited`` mask, the TDD limit
        and the row used [% of I_L].

    Raises
    ------
    InputError
        Unknown edition (field ``study.ieee519_edition``).
    ValueError
        ``isc_over_il`` not finite and > 0, or ``h`` not finite.

    Notes
    -----
    Rows: ``r < 20``, ``20 <= r < 50``, ``50 <= r < 100``, ``100 <= r < 1000``,
    ``r >= 1000`` (lower edge included; common practice).  Odd-order ranges:
    ``3 <= h < 11``, ``11 <= h < 17``, ``17 <= h < 23``, ``23 <= h < 35``,
    ``35 <= h <= 50``; order 2 takes the first range.  Even orders:
    2014: ``0.25 x`` the odd limit of their range; 2022: ``0.5 x`` for
    ``h <= 6`` and ``1.0 x`` above.  Non-integer orders and orders outside
    2..50 are not limited by the table (``limited`` False, limit 0.0).
    The table is that for systems rated 120 V through 69 kV; the tables for
    higher voltages are not included here.

    References
    ----------
    IEEE Std 519-2014, clause 5.2, Table 2 (current distortion limits for
    systems rated 120 V through 69 kV), with its even-order note; IEEE Std
    519-2022, the corresponding table and even-order note.  REFERENCES.md,
    "Voltage and current distortion".
    """
    ed = _edition(edition, file)
    r = float(isc_over_il)
    if not np.isfinite(r) or r <= 0.0:
        raise ValueError(f"isc_over_il must be finite and > 0, got {isc_over_il!r}")
    hh = np.asarray(h, dtype=float)
    if not np.all(np.isfinite(hh)):
        raise ValueError("harmonic orders must be finite")
    row = [x for x in CURRENT_LIMIT_ROWS if r >= x.r_min][-1]

    h_int = np.rint(hh)
    limited = (np.abs(hh - h_int) < 1e-9) & (h_int >= _H_MIN_LIMITED) & (h_int <= _H_MAX_LIMITED)
    odd_limit = np.asarray(row.odd_pct)[np.searchsorted(ORDER_RANGE_EDGES, h_int, side="right")]
    bands, even_text = EVEN_ORDER_RULES[ed]
    even = (h_int % 2) == 0
    band_h = np.array([b[0] for b in bands])
    band_f = np.array([b[1] for b in bands])
    band = np.minimum(np.searchsorted(band_h, h_int, side="left"), band_h.size - 1)
    factor = np.where(even, band_f[band], 1.0)
    individual = np.where(limited, odd_limit * factor, 0.0)
    hh = hh.copy()
    for a in (hh, individual, limited):
        a.setflags(write=False)
    return CurrentLimits(
        h=hh, individual_pct=individual, limited=limited, tdd_pct=row.tdd_pct, row=row.label,
        edition=ed,
        source=(f"IEEE Std 519-{ed} Table 2 (120 V to 69 kV), row I_sc/I_L {row.label} "
                f"{row.source}; rows include their lower edge (common practice); {even_text}"),
    )


def thd_pct(h: np.ndarray, mag: np.ndarray, base: np.ndarray, *, h_max: float = 50.0) -> np.ndarray:
    r"""Total harmonic distortion relative to an explicit base.

    Parameters
    ----------
    h : array_like, shape (n_h,)
        Harmonic orders [unitless].
    mag : array_like, shape (..., n_h)
        Magnitudes per order (voltage or current, any unit; leading axes are a
        batch) [V, A or pu].
    base : array_like, broadcastable to shape (...)
        Denominator in the same unit as ``mag``: the measured fundamental for
        THD in the strict sense, or the nominal voltage to get "% of nominal"
        as IEEE Std 519 uses it [V, A or pu].
    h_max : float, optional
        Highest order included; IEEE Std 519 sums to the 50th [unitless].

    Returns
    -------
    ndarray, shape (...)
        Distortion [% of base].

    Raises
    ------
    ValueError
        Shapes that do not match, or a ``base`` that is not finite and > 0.

    Notes
    -----
    .. math:: \mathrm{THD} = 100 \sqrt{\textstyle\sum_{1 < h \le h_{max}} M_h^2} / M_{base}

    The fundamental (and anything at or below it) is excluded from the numerator.

    References
    ----------
    IEEE Std 519-2014, clause 3 (definition of total harmonic distortion).
    """
    hh = np.asarray(h, dtype=float)
    m = np.abs(np.asarray(mag))
    if hh.ndim != 1 or m.ndim == 0 or m.shape[-1] != hh.size:
        raise ValueError(f"mag must have shape (..., {hh.size}), got {m.shape}")
    b = np.asarray(base, dtype=float)
    if not np.all(np.isfinite(b)) or np.any(b <= 0.0):
        raise ValueError("base must be finite and > 0")
    keep = (hh > 1.0 + 1e-9) & (hh <= h_max * (1.0 + 1e-12))
    sel = m[..., keep]
    return 100.0 * np.sqrt(np.sum(sel * sel, axis=-1)) / b


def tdd_pct(h: np.ndarray, i_mag: np.ndarray, i_l: np.ndarray, *, h_max: float = 50.0) -> np.ndarray:
    r"""Total demand distortion of a current.

    Parameters
    ----------
    h : array_like, shape (n_h,)
        Harmonic orders [unitless].
    i_mag : array_like, shape (..., n_h)
        Current magnitude per order [A].
    i_l : array_like, broadcastable to shape (...)
        Maximum demand load current at the fundamental [A].
    h_max : float, optional
        Highest order included [unitless].

    Returns
    -------
    ndarray, shape (...)
        TDD [% of I_L].

    Notes
    -----
    .. math:: \mathrm{TDD} = 100 \sqrt{\textstyle\sum_{1 < h \le h_{max}} I_h^2} / I_L

    This is :func:`thd_pct` with ``I_L`` as the base.

    References
    ----------
    IEEE Std 519-2014, clause 3 (definition of total demand distortion);
    REFERENCES.md, "Voltage and current distortion".
    """
    return thd_pct(h, i_mag, i_l, h_max=h_max)
