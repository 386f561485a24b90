"""Detuned banks: the settings, the tuning-order rule and its findings (part of the one judge).

The rule a detuned bank's series tuning order must meet (:func:`tuning_reasons`) is applied
alike to a detuned bank given in the case (:func:`detuned_bank_findings`, called by the study)
and to every candidate the detuning search (:mod:`resonance.design.detuning`) proposes, so a
proposal is judged by the same rule as a design the user wrote.  Pure functions, no files.

References
----------
IEEE Std 1531-2020, Guide for the application and specification of harmonic filters (series
L-C branch, detuned banks); /work/shared/REFERENCES.md "Detuned (series reactor) banks"
(p, n, tolerances).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, fields

import numpy as np

from resonance.assessment.findings import Finding
from resonance.errors import InputError

__all__ = ["SETTING_SOURCES", "DetuningSettings", "detuning_settings", "tuning_band", "parallel_band", "tolerance_corners",
           "significant_orders", "tuning_reasons", "detuned_bank_findings", "FILTER_MIN_BELOW_PCT",
           "FILTER_BAND_MARGIN_PCT", "filter_target", "filter_reasons"]

#: a filter branch is tuned at least this far below the harmonic it absorbs [%]: REFERENCES.md
#: "Tuned harmonic filters" ("tune 3-10 % below the target order", IEEE Std 1531 practice, from memory)
FILTER_MIN_BELOW_PCT = 3.0
#: ... and the top of its tolerance band stays this far below it [%] (project choice: the band must
#: not reach the harmonic, where the branch would take the whole site's current and the background's)
FILTER_BAND_MARGIN_PCT = 0.5

# ----------------------------------------------------------------------------- settings

#: Where each default comes from (reported with the settings).
SETTING_SOURCES = {
    "tuning_orders": "common practice: p = 4.34, 5.17, 5.67, 6.93, 8.16, 13.7 %; REFERENCES.md lists "
                     "5.67 % -> 4.20, 7 % -> 3.78, 14 % -> 2.67 [derived]",
    "search": "project choice: 'list' tries tuning_orders; 'continuous' adds the highest order that meets "
              "both margins",
    "order_margin_pct": "common practice: tune below about 90 % of the lowest significant harmonic "
                        "(REFERENCES.md: 'or below 90 % of the dominant harmonic' [published])",
    "band_margin_pct": "project choice (common practice): the tolerance/ageing band of the tuning order "
                       "must stay this far below a significant harmonic",
    "significant_background_pct": "project choice: background voltage at or above this [% of nominal] "
                                  "makes an order significant",
    "significant_injection_pct": "project choice: a source current at or above this [% of the source's "
                                 "fundamental] makes an order significant",
    "cap_tolerance_pct": "REFERENCES.md: capacitance -5/+10 % for units [memory; editions differ]",
    "reactor_tolerance_pct": "common practice, from memory: detuning reactors +-3 % inductance",
    "standard_cap_kv": "common practice, from memory: low-voltage capacitor ratings offered by makers",
    "mv_cap_step_kv": "common practice, from memory: above 1 kV units are made to order; the bank rating "
                      "is rounded up to this step",
    "cap_voltage_margin_pct": "project choice: rated voltage at least U/(1-p) (1 + margin); the re-check's "
                              "duty limits then decide",
    "max_rating_steps": "project choice: how many higher ratings are tried when duty fails",
    "reactor_loss_w_per_kvar": "optional, from the reactor maker: losses per kvar of stage net output",
    "linearity_factor": "REFERENCES.md: linearity current K x I_N [published, manufacturer practice]; "
                        "K = 1.8 common practice, from memory",
    "rearrange_unit_kvar": "project choice: unit for re-arranged stage sizes (auto: 1-2-2.5-5 value "
                           "<= total / (4 N))",
    "recheck": "project choice: 'all' re-checks every candidate that passes the pre-screen, "
               "'first' stops at the first that qualifies",
}


@dataclass(frozen=True)
class DetuningSettings:
    """Settings of the detuning proposal (a ``[detuning]`` table in the case).

    Attributes
    ----------
    tuning_orders : tuple of float
        Series tuning orders tried [unitless].
    search : str
        "list" or "continuous" [unitless].
    order_margin_pct : float
        Nominal tuning at least this far below the lowest significant harmonic [%].
    band_margin_pct : float
        Tolerance band of the tuning (and the parallel resonances) at least this
        far from every significant harmonic [%].
    significant_background_pct : float
        Background voltage threshold for a significant order [% of nominal].
    significant_injection_pct : float
        Source current threshold for a significant order [% of fundamental].
    cap_tolerance_pct, reactor_tolerance_pct : tuple of float
        (low, high) capacitance and inductance deviation [%].
    standard_cap_kv : tuple of float
        Capacitor rated voltages that can be bought [kV].
    mv_cap_step_kv : float
        Rounding step of made-to-order ratings above the list [kV].
    cap_voltage_margin_pct : float
        Margin on the fundamental capacitor voltage when picking the rating [%].
    max_rating_steps : int
        Higher ratings tried when the re-check fails on duty [unitless].
    reactor_loss_w_per_kvar : float or None
        Reactor losses per kvar of stage net output [W/kvar].
    linearity_factor : float
        Linearity current over rated current, K [unitless].
    rearrange_unit_kvar : float or None
        Stage-size unit of re-arrangements (None: automatic) [kvar].
    recheck : str
        "all" or "first" [unitless].
    """

    tuning_orders: tuple = (4.8, 4.4, 4.2, 3.8, 3.5, 2.7)
    search: str = "list"
    order_margin_pct: float = 10.0
    band_margin_pct: float = 5.0
    significant_background_pct: float = 0.5
    significant_injection_pct: float = 2.0
    cap_tolerance_pct: tuple = (-5.0, 10.0)
    reactor_tolerance_pct: tuple = (-3.0, 3.0)
    standard_cap_kv: tuple = (0.23, 0.24, 0.4, 0.415, 0.44, 0.48, 0.525, 0.6, 0.69, 0.8, 1.0)
    mv_cap_step_kv: float = 0.1
    cap_voltage_margin_pct: float = 0.0
    max_rating_steps: int = 2
    reactor_loss_w_per_kvar: float | None = None
    linearity_factor: float = 1.8
    rearrange_unit_kvar: float | None = None
    recheck: str = "all"


def _get(obj, key: str):
    if obj is None:
        return None
    if isinstance(obj, dict):
        return obj.get(key)
    return getattr(obj, key, None)


def detuning_settings(case) -> DetuningSettings:
    """Settings from the case's optional ``detuning`` table (defaults where absent).

    Parameters
    ----------
    case : Case
        Validated case; ``case.detuning`` may be missing, None, a dict or a model.

    Returns
    -------
    DetuningSettings

    Raises
    ------
    InputError
        A value out of range, naming ``detuning.<key>``.
    """
    raw = getattr(case, "detuning", None)
    file = getattr(case, "source_file", "") or "<case>"
    d = DetuningSettings()
    vals = {}
    for f in fields(DetuningSettings):
        v = _get(raw, f.name)
        vals[f.name] = getattr(d, f.name) if v is None else v

    def bad(key: str, problem: str):
        raise InputError.single(file, f"detuning.{key}", problem)

    try:
        orders = tuple(float(x) for x in vals["tuning_orders"])
    except (TypeError, ValueError):
        bad("tuning_orders", "must be a list of numbers")
    if not orders or any(not (1.2 <= n <= 20.0) for n in orders):
        bad("tuning_orders", f"every order must be between 1.2 and 20 (p below 70 %); got {list(orders)}")
    vals["tuning_orders"] = orders
    if vals["search"] not in ("list", "continuous"):
        bad("search", f"must be 'list' or 'continuous'; got {vals['search']!r}")
    if vals["recheck"] not in ("all", "first"):
        bad("recheck", f"must be 'all' or 'first'; got {vals['recheck']!r}")
    for key, lo, hi in (("order_margin_pct", 0.0, 50.0), ("band_margin_pct", 0.0, 50.0),
                        ("significant_background_pct", 0.0, 30.0), ("significant_injection_pct", 0.0, 200.0),
                        ("cap_voltage_margin_pct", 0.0, 50.0), ("linearity_factor", 1.0, 5.0),
                        ("mv_cap_step_kv", 1e-3, 10.0)):
        v = vals[key]
        if not isinstance(v, (int, float)) or not (lo <= float(v) <= hi):
            bad(key, f"must be a number from {lo:g} to {hi:g}; got {v!r}")
        vals[key] = float(v)
    for key in ("cap_tolerance_pct", "reactor_tolerance_pct"):
        v = vals[key]
        try:
            lo, hi = (float(x) for x in v)
        except (TypeError, ValueError):
            bad(key, "must be [low, high] in percent")
        if not (-50.0 < lo <= 0.0 <= hi < 100.0):
            bad(key, f"must be [low <= 0, high >= 0] percent; got {list(v)}")
        vals[key] = (lo, hi)
    try:
        kv = tuple(sorted(float(x) for x in vals["standard_cap_kv"]))
    except (TypeError, ValueError):
        bad("standard_cap_kv", "must be a list of voltages in kV")
    if not kv or kv[0] <= 0:
        bad("standard_cap_kv", "must hold positive voltages in kV")
    vals["standard_cap_kv"] = kv
    for key in ("reactor_loss_w_per_kvar", "rearrange_unit_kvar"):
        v = vals[key]
        if v is not None and (not isinstance(v, (int, float)) or not v > 0):
            bad(key, f"must be a positive number; got {v!r}")
    ms = vals["max_rating_steps"]
    if not isinstance(ms, int) or not 0 <= ms <= 5:
        bad("max_rating_steps", f"must be an integer from 0 to 5; got {ms!r}")
    return DetuningSettings(**vals)



def tolerance_corners(cap_tol_pct, reactor_tol_pct):
    dc = np.array([cap_tol_pct[0], cap_tol_pct[1]], float)[:, None] / 100.0
    dl = np.array([reactor_tol_pct[0], reactor_tol_pct[1]], float)[None, :] / 100.0
    return (1.0 + dc), (1.0 + dl)


def tuning_band(n: float, cap_tol_pct=(-5.0, 10.0), reactor_tol_pct=(-3.0, 3.0)) -> tuple[float, float]:
    """Range of the series tuning order over capacitor and reactor tolerances.

    Parameters
    ----------
    n : float
        Nominal tuning order [unitless].
    cap_tol_pct, reactor_tol_pct : (float, float)
        Low and high deviation of capacitance and inductance [%].

    Returns
    -------
    (n_min, n_max) : (float, float)
        [unitless].

    Notes
    -----
    ``n' = n / sqrt((1 + dC)(1 + dL))`` (derived from ``n = 1/sqrt(p)`` and
    ``omega_r = 1/sqrt(L C)``); loss of capacitance with age raises it.
    """
    kc, kl = tolerance_corners(cap_tol_pct, reactor_tol_pct)
    nn = n / np.sqrt(kc * kl)
    return float(nn.min()), float(nn.max())


def parallel_band(p: float, q_cap_kvar, s_sc_kva: float, cap_tol_pct=(-5.0, 10.0),
                  reactor_tol_pct=(-3.0, 3.0)) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Parallel resonance order of each detuned step with the source, over tolerances.

    Parameters
    ----------
    p : float
        Nominal detuning factor [unitless].
    q_cap_kvar : array_like
        Capacitor reactive power in service of each step at the bus voltage
        (capacitor alone, ``U^2 / X_C``) [kvar].
    s_sc_kva : float
        Short-circuit power at the bank bus [kVA].
    cap_tol_pct, reactor_tol_pct : (float, float)
        Tolerances [%].

    Returns
    -------
    (h_min, h_max, h_nominal) : ndarrays, shape like ``q_cap_kvar``
        [unitless].

    Notes
    -----
    ``h_p = 1 / sqrt(p' + X_s / X_C')`` with ``X_s / X_C = Q_C / S_sc``,
    ``p' = p (1 + dC)(1 + dL)`` and ``X_s/X_C' = (X_s/X_C)(1 + dC)`` (derived,
    REFERENCES.md "Detuned (series reactor) banks").
    """
    q = np.atleast_1d(np.asarray(q_cap_kvar, float))
    kc, kl = tolerance_corners(cap_tol_pct, reactor_tol_pct)
    ratio = q / s_sc_kva
    hp = 1.0 / np.sqrt(p * (kc * kl)[..., None] + ratio[None, None, :] * kc[..., None])
    nominal = 1.0 / np.sqrt(p + ratio)
    return hp.min(axis=(0, 1)), hp.max(axis=(0, 1)), nominal


def significant_orders(sources, background_pct: dict, settings: DetuningSettings,
                       fallback=()) -> tuple[int, ...]:
    """Harmonic orders large enough to matter for the choice of tuning.

    Parameters
    ----------
    sources : list of (name, {order: pct}, pulse)
        Resolved source spectra [% of each source's fundamental current].
    background_pct : dict
        Background voltage per order [% of nominal].
    settings : DetuningSettings
        Thresholds.
    fallback : sequence of int
        Orders used when nothing reaches a threshold (e.g. the characteristic
        orders of the study) [unitless].

    Returns
    -------
    tuple of int
        Significant orders, rising [unitless].
    """
    out = {int(h) for h, pct in (background_pct or {}).items() if pct >= settings.significant_background_pct and pct > 0}
    for _, spec, _ in sources:
        out |= {int(h) for h, pct in spec.items() if pct >= settings.significant_injection_pct and pct > 0}
    if not out:
        out = {int(h) for h in fallback}
    return tuple(sorted(out))


def tuning_reasons(n: float, h_low, st: "DetuningSettings") -> list[str]:
    """Why a series tuning order is unsafe against the lowest significant harmonic (empty: it is safe).

    One rule for the proposals' pre-screen and for a detuned bank the user gives.

    Parameters
    ----------
    n : float
        Nominal tuning order ``1/sqrt(p)`` [unitless].
    h_low : int or None
        Lowest significant harmonic order present (None: nothing to tune below) [unitless].
    st : DetuningSettings
        ``order_margin_pct`` (nominal tuning at least this far below ``h_low``) [%],
        ``band_margin_pct`` (the tolerance band's top at least this far below) [%],
        ``cap_tolerance_pct``, ``reactor_tolerance_pct`` [%].

    Returns
    -------
    list of str
        Plain-language reasons [unitless].

    Notes
    -----
    Fails when ``n > h_low (1 - order_margin/100)`` or, tuned below that, when the top of
    :func:`tuning_band` exceeds ``h_low (1 - band_margin/100)``.

    References
    ----------
    IEEE Std 1531-2020 (tuning below the lowest harmonic, tolerances); the margins are
    common practice (REFERENCES.md "Detuned (series reactor) banks").
    """
    why: list[str] = []
    if h_low is None:
        return why
    n_hi = tuning_band(n, st.cap_tolerance_pct, st.reactor_tolerance_pct)[1]
    lim = h_low * (1.0 - st.order_margin_pct / 100.0)
    if n > lim + 1e-9:
        why.append(f"tuning order {n:.2f} is not {st.order_margin_pct:g} % below the lowest significant "
                   f"harmonic {h_low} (at most {lim:.2f})")
    lim_b = h_low * (1.0 - st.band_margin_pct / 100.0)
    if n <= lim + 1e-9 and n_hi > lim_b:
        why.append(f"with tolerances the tuning reaches {n_hi:.2f}, within {st.band_margin_pct:g} % of the "
                   f"significant harmonic {h_low}")
    return why


def filter_target(n: float, orders) -> int | None:
    """The harmonic a filter branch tuned at ``n`` absorbs: the lowest of ``orders`` above it
    (None when it is tuned above all of them) [unitless]."""
    above = [int(h) for h in orders if h > n]
    return min(above) if above else None


def filter_reasons(n: float, orders, st: "DetuningSettings") -> list[str]:
    """Why a single-tuned filter branch's tuning is unsafe (empty: it is safe).

    Parameters
    ----------
    n : float
        Nominal tuning order ``1/sqrt(p)`` [unitless].
    orders : sequence of int
        Significant harmonic orders present [unitless].
    st : DetuningSettings
        ``cap_tolerance_pct``, ``reactor_tolerance_pct`` [%].

    Returns
    -------
    list of str
        Plain-language reasons [unitless].

    Notes
    -----
    Fails when no significant order lies above ``n``, when ``n`` is less than
    :data:`FILTER_MIN_BELOW_PCT` below its target harmonic, or when the top of
    :func:`tuning_band` comes within :data:`FILTER_BAND_MARGIN_PCT` of it.

    References
    ----------
    IEEE Std 1531-2020 (single-tuned filters are tuned a few percent below the harmonic so that
    tolerances, ageing and temperature do not push them onto it); REFERENCES.md "Tuned harmonic
    filters" [memory].
    """
    target = filter_target(n, orders)
    if target is None:
        return [f"tuning order {n:.2f} is above every significant harmonic; the branch absorbs none"]
    why = []
    lim = target * (1.0 - FILTER_MIN_BELOW_PCT / 100.0)
    if n > lim + 1e-9:
        why.append(f"tuning order {n:.2f} is not {FILTER_MIN_BELOW_PCT:g} % below the harmonic {target} it "
                   f"absorbs (at most {lim:.2f})")
    n_hi = tuning_band(n, st.cap_tolerance_pct, st.reactor_tolerance_pct)[1]
    lim_b = target * (1.0 - FILTER_BAND_MARGIN_PCT / 100.0)
    if n_hi > lim_b:
        why.append(f"with tolerances the tuning reaches {n_hi:.2f}, within {FILTER_BAND_MARGIN_PCT:g} % of the "
                   f"harmonic {target}")
    return why


def detuned_bank_findings(case, sources, characteristic, scans) -> list[Finding]:
    """Findings for a detuned bank given in the case whose tuning is unsafe (same rule as a proposal).

    Parameters
    ----------
    case : Case
        Validated case (``[detuning]`` settings, background voltages).
    sources : list of (name, {order: pct}, pulse)
        Resolved source spectra [%].
    characteristic : sequence of int
        Characteristic orders of the study (fallback for the significant orders) [unitless].
    scans : sequence of BankScan
        The study's scans (the nominal one of each bank is used).

    Returns
    -------
    list of dict
        One ``detuning_tuning`` finding per step of each failing bank (cause ``"bank"``).

    References
    ----------
    See :func:`tuning_reasons`.
    """
    st = detuning_settings(case)
    background = dict(case.supply.background_pct) if case.supply else {}
    sig = significant_orders(sources, background, st, fallback=characteristic)
    kinds = {b.name: getattr(b, "kind", "capacitor") for b in case.bank}
    out = []
    for sc in scans:
        bm = sc.bank
        if sc.scenario != "nominal" or bm.p <= 0:
            continue
        n = 1.0 / math.sqrt(bm.p)
        if kinds.get(bm.name) == "filter":
            why = filter_reasons(n, sig, st)
            target = filter_target(n, sig)
            for s in sc.steps if why else ():
                out.append(Finding(bank=bm.name, step=s.step, scenario="all", check="filter_tuning",
                                   value=n, limit=(target or n) * (1.0 - FILTER_MIN_BELOW_PCT / 100.0),
                                   unit="harmonic order", cause="bank", order=target,
                                   source="IEEE Std 1531-2020 practice; margins from memory / project choice",
                                   message=f"filter {bm.name} step {s.step}: tuning p = {100 * bm.p:g} % "
                                           f"(n = {n:.2f}) is unsafe: " + "; ".join(why)))
            continue
        why = tuning_reasons(n, sig[0] if sig else None, st)
        if not why:
            continue
        for s in sc.steps:
            out.append(Finding(bank=bm.name, step=s.step, scenario="all", check="detuning_tuning",
                               value=n, limit=sig[0] * (1.0 - st.order_margin_pct / 100.0),
                               unit="harmonic order", cause="bank", order=int(sig[0]),
                               source="IEEE Std 1531-2020; margins common practice ([detuning] settings)",
                               message=f"bank {bm.name} step {s.step}: detuned p = {100 * bm.p:g} % is unsafe: "
                                       + "; ".join(why)))
    return out


