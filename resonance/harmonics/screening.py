"""Hand checks and screening rules for a bank step's resonance.

References
----------
IEEE Std 1036-2010, Guide for the application of shunt power capacitors,
clause on harmonic resonance (``h_r = sqrt(S_sc / Q_C)``); IEEE Std 519-2014,
annex on harmonic resonance; characteristic orders ``h = k p +- 1`` of a
p-pulse converter (J. Arrillaga, N. R. Watson, *Power System Harmonics*,
2nd ed., Wiley 2003, ch. 4).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

__all__ = ["HarmonicOrders", "orders_of_concern", "nearest_order", "h_estimate", "characteristic"]


@dataclass(frozen=True)
class HarmonicOrders:
    """Harmonic orders of concern for a study.

    Attributes
    ----------
    injected : tuple of int
        Orders injected by the harmonic sources with a non-zero magnitude.
    background : tuple of int
        Orders present in the supply's background distortion.
    characteristic : tuple of int
        Characteristic orders ``k p +- 1`` of the sources' pulse numbers
        (six-pulse when the case has no source).
    pulses : tuple of int
        Pulse numbers considered.
    """

    injected: tuple
    background: tuple
    characteristic: tuple
    pulses: tuple

    def all(self) -> list[tuple[int, str]]:
        """Every order with the kind that puts it on the list (injected first)."""
        seen: dict[int, str] = {}
        for kind, hs in (("injected", self.injected), ("background", self.background),
                         ("characteristic", self.characteristic)):
            for h in hs:
                seen.setdefault(int(h), kind)
        return sorted(seen.items())


def characteristic(pulse: int, h_max: float) -> list[int]:
    """Characteristic orders ``k p +- 1`` up to ``h_max`` (see :func:`resonance.standards.spectra.characteristic_orders`).

    Parameters
    ----------
    pulse : int
        Converter pulse number [unitless].
    h_max : float
        Highest order [unitless].

    Returns
    -------
    list of int
        Orders [unitless].

    References
    ----------
    Arrillaga & Watson, *Power System Harmonics*, 2nd ed., ch. 4.
    """
    from resonance.standards.spectra import characteristic_orders  # noqa: PLC0415

    return [int(h) for h in characteristic_orders(int(pulse), float(h_max))]


def orders_of_concern(sources: list, background_pct: dict, h_max: float) -> HarmonicOrders:
    """Collect the orders a resonance must stay away from.

    Parameters
    ----------
    sources : list of (name, {order: pct}, pulse)
        Resolved spectra [% of fundamental current].
    background_pct : dict
        Background voltage per order [% of nominal].
    h_max : float
        Scan range [unitless].

    Returns
    -------
    HarmonicOrders
    """
    inj = sorted({int(h) for _, spec, _ in sources for h, pct in spec.items() if pct > 0 and h <= h_max})
    bg = sorted({int(h) for h, pct in background_pct.items() if pct > 0 and h <= h_max})
    pulses = sorted({int(p) for _, _, p in sources if p}) or [6]
    ch = sorted({h for p in pulses for h in characteristic(p, h_max)})
    return HarmonicOrders(tuple(inj), tuple(bg), tuple(ch), tuple(pulses))


def nearest_order(h_r: float, orders: HarmonicOrders) -> tuple[int | None, str | None, float | None]:
    """Nearest order of concern to a resonance and the margin to it.

    Parameters
    ----------
    h_r : float
        Resonance order [unitless].
    orders : HarmonicOrders
        Orders of concern.

    Returns
    -------
    (order, kind, margin_pct)
        Nearest order [unitless], why it is on the list, and
        ``100 (h_r - h) / h`` [%] (negative: resonance below the order).
        All None when there is no order of concern.

    Notes
    -----
    The screening margin (default +-10 %) is common practice.
    """
    cands = orders.all()
    if not cands:
        return None, None, None
    best = min(cands, key=lambda hk: (abs(h_r - hk[0]) / hk[0], hk[0]))
    return best[0], best[1], 100.0 * (h_r - best[0]) / best[0]


def h_estimate(s_sc_kva: float, q_cap_kvar: float, p: float = 0.0) -> float:
    """Hand estimate of the parallel resonance order of a bank step.

    Parameters
    ----------
    s_sc_kva : float
        Short-circuit power at the bank bus (physical, c = 1) [kVA].
    q_cap_kvar : float
        Capacitor reactive power in service at the bus nominal voltage
        (capacitor alone, i.e. ``U_n^2 / X_C``) [kvar].
    p : float
        Detuning factor ``X_L / X_C`` [unitless]; 0 for a plain bank.

    Returns
    -------
    float
        ``sqrt(S_sc / Q_C)`` for a plain bank, ``1 / sqrt(p + X_s / X_C)`` for a
        detuned one (``X_s / X_C = Q_C / S_sc``) [unitless].

    References
    ----------
    IEEE Std 1036-2010, clause 6.2 (harmonic resonance, ``h = sqrt(MVA_sc/Mvar_cap)``);
    the detuned form follows from the series L-C branch against the source
    reactance (derived).
    """
    if q_cap_kvar <= 0 or s_sc_kva <= 0:
        return float("nan")
    return 1.0 / math.sqrt(p + q_cap_kvar / s_sc_kva)
