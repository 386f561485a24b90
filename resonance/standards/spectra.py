"""Harmonic source spectra and the summation of several sources.

A spectrum gives the harmonic current of a non-linear load per order in percent
of its fundamental current.  Built-in spectra (:data:`BUILTIN_SPECTRA`) carry a
note saying where their numbers come from; a case may instead give its own
table, checked by :func:`resolve_spectrum`.  :func:`combine` adds the
contributions of several sources at each order.
"""

from __future__ import annotations

import math
import numbers
from dataclasses import dataclass
from types import MappingProxyType
from typing import Any, Mapping

import numpy as np

from resonance.errors import InputError, InputProblem

__all__ = [
    "Spectrum",
    "BUILTIN_SPECTRA",
    "H_MAX_SPECTRUM",
    "COMBINE_RULES",
    "SUMMATION_EXPONENTS",
    "characteristic_orders",
    "resolve_spectrum",
    "summation_exponent",
    "combine",
]

#: Highest order a spectrum table may give [unitless].
H_MAX_SPECTRUM = 100

#: Rules accepted by :func:`combine`.
COMBINE_RULES = ("arithmetic", "iec61000-3-6", "phasor")

#: Summation-law exponents, rows ``(h_upper, upper_included, alpha)`` in rising
#: order: alpha = 1 for h < 5, 1.4 for 5 <= h <= 10, 2 for h > 10.
#: IEC 61000-3-6 [memory] (REFERENCES.md, "Harmonic sources").
SUMMATION_EXPONENTS: tuple[tuple[float, bool, float], ...] = (
    (5.0, False, 1.0),
    (10.0, True, 1.4),
    (math.inf, True, 2.0),
)


@dataclass(frozen=True, eq=False)
class Spectrum:
    """Harmonic current spectrum of one kind of source.

    Attributes
    ----------
    name : str
        Built-in name, or ``"table"`` for a spectrum given in the case [unitless].
    h : ndarray of int
        Orders, rising, all >= 2 [unitless].
    pct : ndarray of float
        Current magnitude per order [% of the fundamental current].
    phase_deg : ndarray of float or None
        Angle per order, or None when no angles are known [deg].
    pulse_number : int or None
        Converter pulse number where the spectrum is that of a p-pulse
        converter [unitless].
    note : str
        Where the numbers come from, with a marker (derived, from memory, ...)
        [unitless].
    """

    name: str
    h: np.ndarray
    pct: np.ndarray
    phase_deg: np.ndarray | None
    pulse_number: int | None
    note: str

    def pct_at(self, h: np.ndarray) -> np.ndarray:
        """Magnitudes on a grid of orders, 0 where the spectrum has none.

        Parameters
        ----------
        h : array_like
            Orders to evaluate at [unitless].

        Returns
        -------
        ndarray
            Magnitude at each order (orders within 1e-9 of an integer order of
            the spectrum match it) [% of the fundamental current].
        """
        hh = np.asarray(h, dtype=float)
        h_int = np.rint(hh)
        idx = np.clip(np.searchsorted(self.h, h_int), 0, self.h.size - 1)
        hit = (self.h[idx] == h_int) & (np.abs(hh - h_int) < 1e-9)
        return np.where(hit, self.pct[idx], 0.0)


def _ro(a: np.ndarray) -> np.ndarray:
    a = np.array(a)
    a.setflags(write=False)
    return a


def characteristic_orders(pulse: int, h_max: float) -> np.ndarray:
    """Characteristic harmonic orders of a p-pulse converter.

    Parameters
    ----------
    pulse : int
        Pulse number ``p`` (>= 2) [unitless].
    h_max : float
        Highest order returned [unitless].

    Returns
    -------
    ndarray of int
        Orders ``k p - 1`` and ``k p + 1`` for ``k = 1, 2, ...``, rising,
        between 2 and ``h_max`` [unitless].

    Raises
    ------
    ValueError
        ``pulse`` not an integer >= 2, or ``h_max`` not finite.

    Notes
    -----
    .. math:: h = k p \\pm 1, \\quad k = 1, 2, \\ldots

    References
    ----------
    REFERENCES.md, "Harmonic sources" [published]; e.g. J. Arrillaga,
    N. R. Watson, *Power System Harmonics*, 2nd ed., Wiley 2003, ch. on
    static converters.
    """
    if isinstance(pulse, bool) or not isinstance(pulse, numbers.Integral) or pulse < 2:
        raise ValueError(f"pulse must be an integer >= 2, got {pulse!r}")
    if not math.isfinite(h_max):
        raise ValueError(f"h_max must be finite, got {h_max!r}")
    p = int(pulse)
    k = np.arange(1, int(math.floor((h_max + 1) / p)) + 1)
    h = np.unique(np.concatenate([k * p - 1, k * p + 1]))
    return h[(h >= 2) & (h <= h_max)]


def _ideal(pulse: int, name: str) -> Spectrum:
    h = characteristic_orders(pulse, 49)
    return Spectrum(name=name, h=_ro(h), pct=_ro(100.0 / h), phase_deg=None, pulse_number=pulse,
                    note=f"[derived] ideal {pulse}-pulse converter with flat dc current: "
                         "I_h / I_1 = 1/h at h = k p +- 1, to the 49th")


def _typical(name: str, table: dict[int, float], note: str) -> Spectrum:
    h = np.array(sorted(table))
    return Spectrum(name=name, h=_ro(h), pct=_ro([table[k] for k in h]), phase_deg=None,
                    pulse_number=6, note=note)


#: Built-in spectra by name.  Drive spectra are representative values chosen
#: inside the ranges quoted in REFERENCES.md "Harmonic sources" (typical, from memory).
BUILTIN_SPECTRA: Mapping[str, Spectrum] = MappingProxyType({
    "six-pulse-ideal": _ideal(6, "six-pulse-ideal"),
    "twelve-pulse-ideal": _ideal(12, "twelve-pulse-ideal"),
    "six-pulse-drive": _typical(
        "six-pulse-drive",
        {5: 70.0, 7: 45.0, 11: 9.0, 13: 6.0, 17: 4.0, 19: 3.0, 23: 2.0, 25: 2.0},
        "typical, from memory: six-pulse diode-bridge drive without ac or dc choke; "
        "quoted range THD_i about 80-100 % with h5 60-80 % (this table: THD_i 84.1 %, h5 70 %); "
        "orders above the 5th chosen to fit, not quoted"),
    "six-pulse-drive-choke": _typical(
        "six-pulse-drive-choke",
        {5: 35.0, 7: 12.0, 11: 7.0, 13: 5.0, 17: 3.0, 19: 2.5, 23: 2.0, 25: 1.5},
        "typical, from memory: six-pulse drive with a 3-5 % ac or dc choke; quoted range "
        "THD_i about 35-45 % with h5 30-40 %, h7 10-15 % (this table: THD_i 38.3 %); "
        "orders above the 7th chosen to fit, not quoted"),
})


def _as_order(key: Any) -> int | None:
    """An integer-like order (int, integral float, or such a string), else None."""
    if isinstance(key, bool):
        return None
    if isinstance(key, numbers.Integral):
        return int(key)
    if isinstance(key, str):
        s = key.strip()
        try:
            return int(s)
        except ValueError:
            try:
                key = float(s)
            except ValueError:
                return None
    if isinstance(key, numbers.Real) and math.isfinite(key) and float(key).is_integer():
        return int(key)
    return None


def _as_number(x: Any) -> float | None:
    if isinstance(x, bool) or not isinstance(x, numbers.Real):
        return None
    return float(x)


def _read_table(table: Mapping[Any, Any], file: str, field: str, what: str,
                probs: list[InputProblem], *, lo: float | None) -> dict[int, float]:
    """Check a table {order: number}; append problems; return the good entries."""
    out: dict[int, float] = {}
    for key, val in table.items():
        h = _as_order(key)
        if h is None or not (2 <= h <= H_MAX_SPECTRUM):
            probs.append(InputProblem(file, field, f"order {key!r} must be an integer from 2 to "
                                                   f"{H_MAX_SPECTRUM}"))
            continue
        if h in out:
            probs.append(InputProblem(file, field, f"order {h} is given twice"))
            continue
        x = _as_number(val)
        if x is None or not math.isfinite(x) or (lo is not None and x < lo):
            need = f"a finite number >= {lo:g}" if lo is not None else "a finite number"
            probs.append(InputProblem(file, field, f"order {h}: {what} {val!r} must be {need}"))
            continue
        out[h] = x
    return out


def resolve_spectrum(spec: str | Mapping[Any, Any], *, file: str, field: str,
                     phase_deg: Mapping[Any, Any] | None = None) -> Spectrum:
    """Turn a case's spectrum entry into a checked :class:`Spectrum`.

    Parameters
    ----------
    spec : str or mapping
        A name from :data:`BUILTIN_SPECTRA`, or a table ``{order: pct}``; keys
        may be integers or integer strings (TOML tables give ``"5"``) [unitless,
        % of the fundamental current].
    file : str
        Input file, for error messages [unitless].
    field : str
        Dotted field of ``spec``, e.g. ``harmonic_source[0].spectrum`` [unitless].
    phase_deg : mapping, optional
        Angles ``{order: deg}`` for every order of the spectrum, or None.  They
        are given separately from the magnitudes (as the case file does); their
        problems name the sibling field ``phase_deg`` (``field`` with its last
        part replaced) [deg].

    Returns
    -------
    Spectrum
        The spectrum, orders rising [% of the fundamental current].

    Raises
    ------
    InputError
        Every problem found at once: unknown name (the valid names are
        listed), orders not integers from 2 to :data:`H_MAX_SPECTRUM`,
        magnitudes negative or not finite, an empty table, angles not finite,
        for orders without a magnitude, or missing for some orders.

    References
    ----------
    REFERENCES.md, "Harmonic sources" (built-in spectra and their sources).
    """
    probs: list[InputProblem] = []
    parent = field.rpartition(".")[0]
    phase_field = f"{parent}.phase_deg" if parent else "phase_deg"
    base: Spectrum | None = None
    if isinstance(spec, str):
        base = BUILTIN_SPECTRA.get(spec.strip())
        if base is None:
            valid = ", ".join(repr(k) for k in BUILTIN_SPECTRA)
            raise InputError.single(file, field,
                                    f"unknown spectrum {spec!r}; built-in spectra are {valid}, "
                                    "or give a table {order = percent}")
    elif isinstance(spec, Mapping):
        if not spec:
            raise InputError.single(file, field, "the spectrum table is empty")
        table = _read_table(spec, file, field, "magnitude", probs, lo=0.0)
        h = np.array(sorted(table), dtype=int)
        base = Spectrum(name="table", h=_ro(h), pct=_ro(np.array([table[k] for k in h], dtype=float)),
                        phase_deg=None, pulse_number=None, note="given in the case file")
    else:
        raise InputError.single(file, field, "must be a built-in spectrum name or a table "
                                             "{order = percent}")

    phases: np.ndarray | None = None
    if phase_deg:
        if not isinstance(phase_deg, Mapping):
            probs.append(InputProblem(file, phase_field, "must be a table {order = degrees}"))
        else:
            angles = _read_table(phase_deg, file, phase_field, "angle", probs, lo=None)
            known = set(int(k) for k in base.h)
            extra = sorted(set(angles) - known)
            if extra:
                probs.append(InputProblem(file, phase_field, "orders "
                                          + ", ".join(map(str, extra)) + " have an angle but no magnitude"))
            missing = sorted(known - set(angles))
            if missing and not extra and len(angles) == len(phase_deg):
                probs.append(InputProblem(file, phase_field, "give an angle for every order of the "
                                          "spectrum or none; missing: " + ", ".join(map(str, missing))))
            if not missing:
                phases = np.array([angles[int(k)] for k in base.h], dtype=float)
    if probs:
        raise InputError(probs)
    if phases is None:
        return base
    return Spectrum(name=base.name, h=base.h, pct=base.pct, phase_deg=_ro(phases),
                    pulse_number=base.pulse_number, note=base.note)


def summation_exponent(h: np.ndarray) -> np.ndarray:
    """Exponent of the harmonic summation law at each order.

    Parameters
    ----------
    h : array_like
        Harmonic orders [unitless].

    Returns
    -------
    ndarray
        ``alpha``: 1 for ``h < 5``, 1.4 for ``5 <= h <= 10``, 2 for ``h > 10``
        [unitless].

    References
    ----------
    IEC 61000-3-6, summation law for harmonic emissions of several sources
    (exponents from memory; REFERENCES.md, "Harmonic sources").
    """
    hh = np.asarray(h, dtype=float)
    conds = [(hh <= up) if incl else (hh < up) for up, incl, _ in SUMMATION_EXPONENTS]
    return np.select(conds, [a for _, _, a in SUMMATION_EXPONENTS], default=SUMMATION_EXPONENTS[-1][2])


def combine(mags: np.ndarray, rule: str = "arithmetic", h: np.ndarray | None = None,
            phase_deg: np.ndarray | None = None, *, file: str = "<input>") -> np.ndarray:
    r"""Combine the harmonic magnitudes of several sources order by order.

    Parameters
    ----------
    mags : array_like, shape (n_src, ..., n_h)
        Magnitude of each source at each order (current or voltage, any unit;
        axis 0 runs over sources) [A, V or pu].
    rule : str, optional
        ``"arithmetic"`` (sum of magnitudes, the worst case),
        ``"iec61000-3-6"`` (summation law, needs ``h``) or ``"phasor"``
        (complex sum, needs ``phase_deg``) [unitless].
    h : array_like, shape (n_h,), optional
        Harmonic orders, for the summation law [unitless].
    phase_deg : array_like, shape of ``mags``, optional
        Angle of each source at each order, for the phasor sum [deg].
    file : str, optional
        Input file, for the error message on an unknown rule [unitless].

    Returns
    -------
    ndarray, shape (..., n_h)
        Combined magnitude per order [unit of ``mags``].

    Raises
    ------
    InputError
        Unknown rule (field ``study.summation``).
    ValueError
        Magnitudes negative or not finite, or ``h`` / ``phase_deg`` missing or
        of the wrong shape for the rule.

    Notes
    -----
    .. math::

        M_h = \sum_s M_{s,h} \quad\text{(arithmetic)},\qquad
        M_h = \Big(\sum_s M_{s,h}^{\alpha_h}\Big)^{1/\alpha_h}
        \quad\text{(summation law)},\qquad
        M_h = \Big|\sum_s M_{s,h} e^{j\varphi_{s,h}}\Big| \quad\text{(phasor)}

    with :math:`\alpha_h` from :func:`summation_exponent`.

    References
    ----------
    IEC 61000-3-6, summation law (from memory); REFERENCES.md, "Harmonic
    sources" (arithmetic sum as the worst case).
    """
    if rule not in COMBINE_RULES:
        valid = ", ".join(repr(r) for r in COMBINE_RULES)
        raise InputError.single(file, "study.summation",
                                f"unknown summation rule {rule!r}; choose one of {valid}")
    m = np.asarray(mags, dtype=float)
    if m.ndim < 2:
        raise ValueError(f"mags must have shape (n_src, ..., n_h), got {m.shape}")
    if not np.all(np.isfinite(m)) or np.any(m < 0.0):
        raise ValueError("mags must hold finite magnitudes >= 0")
    if rule == "arithmetic":
        return np.sum(m, axis=0)
    if rule == "iec61000-3-6":
        if h is None:
            raise ValueError("the summation law needs the orders h")
        hh = np.asarray(h, dtype=float)
        if hh.shape != (m.shape[-1],):
            raise ValueError(f"h must have shape ({m.shape[-1]},), got {hh.shape}")
        alpha = summation_exponent(hh)
        return np.sum(m ** alpha, axis=0) ** (1.0 / alpha)
    if phase_deg is None:
        raise ValueError("the phasor sum needs phase_deg")
    ph = np.asarray(phase_deg, dtype=float)
    if ph.shape != m.shape or not np.all(np.isfinite(ph)):
        raise ValueError(f"phase_deg must be finite with the shape of mags {m.shape}, got {ph.shape}")
    return np.abs(np.sum(m * np.exp(1j * np.deg2rad(ph)), axis=0))
