"""Detuning-reactor proposals for capacitor banks that fail the screening.

For every bank the module tries a list of series tuning orders, rates the
reactor and the capacitors of each candidate, checks the tuning against the
capacitor and reactor tolerances, re-runs the whole study with the detuned bank
in place (every step, nominal and weak supply) and ranks the candidates that
pass.  Where a plain bank fails only on some steps it also looks for another
split of the same total kvar into stages whose every switching state stays
clear of the harmonic orders of concern.

The rating arithmetic (:func:`detuned_step`, :func:`nameplate_kvar`,
:func:`tuning_band`, :func:`parallel_band`, :func:`rearrange_stages`) is pure;
:func:`propose_detuning` additionally calls :func:`resonance.assessment.study.run_study`
for the re-check.  No files, no printing.

References
----------
IEEE Std 1531-2020, Guide for the application and specification of harmonic
filters (series L-C branch, detuned banks); IEEE Std 18-2002 (capacitor duty,
via :mod:`resonance.standards.duty`); IEEE Std 519-2014 (PCC limits, via
:mod:`resonance.assessment.assess`); /work/shared/REFERENCES.md "Detuned (series reactor)
banks" (p, n, U_C, Q_net, tolerances, linearity current).
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, fields

import numpy as np

from resonance.errors import InputError, ModelError

__all__ = [
    "run_variant",
    "DetuningSettings",
    "DetunedStep",
    "detuning_settings",
    "detuned_step",
    "nameplate_kvar",
    "capacitor_rating_kv",
    "tuning_band",
    "parallel_band",
    "significant_orders",
    "stage_share_max",
    "rearrange_stages",
    "propose_detuning",
]

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


# ----------------------------------------------------------------------------- pure rating arithmetic

@dataclass(frozen=True, eq=False)
class DetunedStep:
    """Ratings of detuned stages (per phase, wye equivalent).

    Attributes
    ----------
    x_c_ohm : ndarray
        Capacitor reactance at the fundamental ``U_CR^2 / Q_CR`` [ohm].
    x_l_ohm : ndarray
        Reactor reactance ``p X_C`` [ohm].
    l_mh : ndarray
        Reactor inductance [mH].
    n : float
        Series tuning order ``1/sqrt(p)`` [unitless].
    f_tuning_hz : float
        Series tuning frequency [Hz].
    u_c1_kv : float
        Fundamental capacitor voltage at the bus voltage, ``U/(1-p)`` [kV].
    q_net_kvar : ndarray
        Net output of each stage at the bus voltage [kvar].
    """

    x_c_ohm: np.ndarray
    x_l_ohm: np.ndarray
    l_mh: np.ndarray
    n: float
    f_tuning_hz: float
    u_c1_kv: float
    q_net_kvar: np.ndarray


def detuned_step(q_cap_kvar, u_cap_kv: float, p: float, f_hz: float, u_bus_kv: float) -> DetunedStep:
    """Reactor and capacitor figures of detuned stages.

    Parameters
    ----------
    q_cap_kvar : float or array_like
        Capacitor nameplate of each stage at ``u_cap_kv`` [kvar].
    u_cap_kv : float
        Capacitor rated voltage, line to line [kV].
    p : float
        Detuning factor ``X_L / X_C`` [unitless], 0 < p < 1.
    f_hz : float
        Fundamental frequency [Hz].
    u_bus_kv : float
        Bus voltage, line to line [kV].

    Returns
    -------
    DetunedStep

    Notes
    -----
    ``X_C = U_CR^2 / Q_CR`` (wye equivalent per phase), ``X_L = p X_C``,
    ``L = X_L / (2 pi f)``, ``n = 1/sqrt(p)``, ``U_C = U / (1 - p)``,
    ``Q_net = Q_CR (U/U_CR)^2 / (1 - p)``.

    References
    ----------
    REFERENCES.md "Detuned (series reactor) banks" [published]; IEEE Std 1531-2020
    (series L-C branch).
    """
    q = np.atleast_1d(np.asarray(q_cap_kvar, float))
    if not (0.0 < p < 1.0):
        raise ValueError(f"detuning factor p = {p} must be between 0 and 1")
    x_c = 1000.0 * u_cap_kv**2 / q
    x_l = p * x_c
    n = 1.0 / math.sqrt(p)
    return DetunedStep(x_c_ohm=x_c, x_l_ohm=x_l, l_mh=1000.0 * x_l / (2.0 * math.pi * f_hz), n=n,
                       f_tuning_hz=n * f_hz, u_c1_kv=u_bus_kv / (1.0 - p),
                       q_net_kvar=q * (u_bus_kv / u_cap_kv) ** 2 / (1.0 - p))


def nameplate_kvar(q_net_kvar, u_cap_kv: float, u_bus_kv: float, p: float) -> np.ndarray:
    """Capacitor nameplate that delivers a given net output at the bus.

    Parameters
    ----------
    q_net_kvar : float or array_like
        Wanted net output of the detuned stage at ``u_bus_kv`` [kvar].
    u_cap_kv : float
        Capacitor rated voltage [kV].
    u_bus_kv : float
        Bus voltage [kV].
    p : float
        Detuning factor [unitless].

    Returns
    -------
    ndarray
        ``Q_CR = Q_net (U_CR/U)^2 (1 - p)`` [kvar].

    References
    ----------
    REFERENCES.md "Detuned (series reactor) banks", inverse of
    ``Q_net = Q_CR (U/U_CR)^2 / (1 - p)`` [published].
    """
    return np.asarray(q_net_kvar, float) * (u_cap_kv / u_bus_kv) ** 2 * (1.0 - p)


def capacitor_rating_kv(u_need_kv: float, standard_kv, mv_step_kv: float = 0.1) -> float:
    """Lowest rated voltage that can be bought at or above a need.

    Parameters
    ----------
    u_need_kv : float
        Needed capacitor voltage [kV].
    standard_kv : sequence of float
        Ratings on offer [kV].
    mv_step_kv : float
        Above the list (medium voltage, made to order): round up to this step [kV].

    Returns
    -------
    float
        The lowest listed rating at or above the need; above the list, the need
        rounded up to a multiple of ``mv_step_kv`` [kV].

    Notes
    -----
    Common practice (from memory): low-voltage units come in standard ratings,
    medium-voltage banks are assembled from units made to order.
    """
    tol = 1e-9
    for kv in sorted(standard_kv):
        if kv >= u_need_kv - tol:
            return float(kv)
    return float(round(math.ceil(u_need_kv / mv_step_kv - tol) * mv_step_kv, 6))


def _next_ratings(kv0: float, standard_kv, mv_step_kv: float, count: int) -> list[float]:
    out = [kv0]
    while len(out) <= count:
        out.append(capacitor_rating_kv(out[-1] * (1.0 + 1e-6) + 1e-9, standard_kv, mv_step_kv))
    return out


def _corners(cap_tol_pct, reactor_tol_pct):
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
    kc, kl = _corners(cap_tol_pct, reactor_tol_pct)
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
    kc, kl = _corners(cap_tol_pct, reactor_tol_pct)
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


def stage_share_max(stage_kvar, step_values: np.ndarray) -> np.ndarray:
    """Largest share of a step quantity that each stage carries.

    Parameters
    ----------
    stage_kvar : array_like, shape (N,)
        Stage sizes (all stages of one detuning factor) [kvar].
    step_values : ndarray, shape (N,) or (N, m)
        A current of the whole bank at steps 1..N [A].

    Returns
    -------
    ndarray, shape (N,) or (N, m)
        For stage k the maximum over steps s >= k of ``value_s Q_k / sum_{j<=s} Q_j`` [A].

    Notes
    -----
    Stages with equal p are parallel branches of equal shape, so they share the
    bank current in proportion to their capacitance (derived).
    """
    q = np.asarray(stage_kvar, float)
    v = np.asarray(step_values, float)
    cum = np.cumsum(q)
    share = np.where(np.arange(q.size)[:, None] <= np.arange(q.size)[None, :], q[:, None] / cum[None, :], 0.0)
    if v.ndim == 1:
        return np.max(share * v[None, :], axis=1)
    return np.max(share[:, :, None] * v[None, :, :], axis=1)


def rearrange_stages(allowed: np.ndarray, n_max: int) -> tuple[int, ...] | None:
    """Split ``U`` units into at most ``n_max`` stages whose cumulative states are all allowed.

    Parameters
    ----------
    allowed : ndarray of bool, shape (U,)
        ``allowed[c - 1]``: the state with ``c`` units in service is acceptable [unitless].
    n_max : int
        Most stages [unitless].

    Returns
    -------
    tuple of int or None
        Stage sizes in units (first switched first); None when no split exists.

    Notes
    -----
    Lexicographic choice: the largest stage as small as possible (fine
    control), then the smallest stage as large as possible (no token stages),
    then as many stages as allowed.  Solved by a reachability table over
    (stages used, units in service) for each trial pair of stage bounds.
    """
    a = np.asarray(allowed, bool)
    u = int(a.size)
    if u == 0 or not a[-1] or n_max < 1:
        return None
    ok = np.concatenate([[True], a])  # state 0 (bank off) is always reachable

    def table(lo: int, hi: int) -> np.ndarray:
        # reach[k, c]: c units in service after exactly k stages of lo..hi units, every state allowed
        reach = np.zeros((n_max + 1, u + 1), bool)
        reach[0, 0] = True
        for k in range(1, n_max + 1):
            prev = reach[k - 1]
            cur = np.zeros(u + 1, bool)
            for step in range(lo, hi + 1):
                cur[step:] |= prev[: u + 1 - step]
            reach[k] = cur & ok
        return reach

    for hi in range(1, u + 1):
        if not table(1, hi)[:, u].any():
            continue
        for lo in range(hi, 0, -1):
            reach = table(lo, hi)
            ks = np.nonzero(reach[:, u])[0]
            if ks.size == 0:
                continue
            k = int(ks.max())
            sizes, c = [], u
            for kk in range(k, 0, -1):  # walk back through reachable states
                for step in range(hi, lo - 1, -1):
                    if c - step >= 0 and reach[kk - 1, c - step]:
                        sizes.append(step)
                        c -= step
                        break
            return tuple(reversed(sizes))
    return None  # pragma: no cover - hi = u always reaches u in one stage


# ----------------------------------------------------------------------------- evaluation of a study result

def _bank_status(result, case, model, bank_name: str) -> dict:
    """Step-by-step figures of one bank in every scenario, and its verdict.

    The verdict is the one assessment's (:func:`resonance.assessment.verdict.bank_findings`): the bank
    passes when no finding in any step or scenario is its own (resonance, capacitor duty, the
    tuning of a detuned bank, and any distortion figure that the bank causes or makes worse;
    the site's own distortion, already beyond its limit with the bank off, does not block it).
    No second set of rules lives here.
    """
    from resonance.assessment.verdict import bank_findings  # noqa: PLC0415

    own = bank_findings(result.findings, bank_name)
    out = {"scenarios": {}, "problems": [f["message"] for f in own],
           "resonance_ok": not any(f["check"] == "resonance" for f in own),
           "duty_ok": not any(str(f["check"]).startswith("duty_") for f in own),
           "pcc_ok": not any(str(f["check"]).startswith("pcc_") for f in own),
           "tuning_ok": not any(f["check"] == "detuning_tuning" for f in own)}
    for sc in result.scans:
        if sc.bank.name != bank_name:
            continue
        asm = result.assessment_for(bank_name, sc.scenario)
        rows = []
        for s, sd in zip(sc.steps, asm.steps):
            f = sd.fields
            worse = [x["check"] for x in own if x["scenario"] == sc.scenario and x["step"] == s.step
                     and str(x["check"]).startswith("pcc_")]
            m = f["duty_margins_pct"]
            rows.append({
                "step": s.step, "h_scan": None if s.h_scan is None else round(s.h_scan, 3),
                "nearest_order": s.nearest_order,
                "margin_pct": None if s.margin_pct is None else round(s.margin_pct, 2),
                "resonance_ok": bool(s.resonance_ok), "duty_ok": bool(f["duty_ok"]),
                "cap_v_rms_pct": f["cap_v_rms_pct"], "cap_v_peak_pct": f["cap_v_peak_pct"],
                "cap_i_rms_pct": f["cap_i_rms_pct"], "cap_kvar_pct": f["cap_kvar_pct"],
                "duty_margin_pct": round(min(m.values()), 3), "duty_governing": f["duty_governing"],
                "bank_i_rms_a": f["bank_i_rms_a"], "i_bank_h_a": {str(hh["h"]): hh["i_bank_a"] for hh in f["harmonics"]},
                "tdd_pct": f["tdd_pct"], "thd_v_pcc_pct": f["thd_v_pcc_pct"], "pcc_worse_than_off": worse,
            })
        out["scenarios"][sc.scenario] = {"sc_mva": round(sc.sc_mva, 4), "steps": rows,
                                         "pcc_off": {"thd_v_pct": asm.bank_off["thd_v_pcc_pct"],
                                                     "tdd_pct": asm.bank_off["tdd_pct"]}}
    out["passes"] = not own
    return out


def _r(x, nd: int = 4):
    if x is None:
        return None
    if isinstance(x, (list, tuple, np.ndarray)):
        return [_r(v, nd) for v in x]
    return round(float(x), nd)


def _variant(case, bank, **update):
    from resonance.inputs.case import Bank, check_case  # noqa: PLC0415

    data = bank.model_dump()
    data.update(update)
    new_bank = Bank.model_validate(data)  # same checks as a case file would get
    banks = [new_bank if b.name == bank.name else b for b in case.bank]
    variant = case.model_copy(update={"bank": banks})
    probs = check_case(variant)
    if probs:
        raise InputError(probs)
    return variant


def _touches(lo: float, hi: float, orders, margin_pct: float) -> list[int]:
    m = margin_pct / 100.0
    return [int(h) for h in orders if lo <= h * (1.0 + m) and hi >= h * (1.0 - m)]


def _nice_unit(x: float) -> float:
    if x <= 0:
        return 0.0
    k = math.floor(math.log10(x))
    for mant in (5.0, 2.5, 2.0, 1.0):
        if mant * 10**k <= x * (1 + 1e-9):
            return mant * 10**k
    return 10 ** (k - 1) * 5.0


def _run(variant, model, clock: list):
    clock.append(1)  # counts the re-checks of one bank
    return run_variant(variant, model)


def run_variant(variant, model):
    """Study of a variant of a case on the same plant model, memoised on the model.

    Parameters
    ----------
    variant : Case
        The case with changed bank data (same network).
    model : PlantModel
        Plant model of the original case.

    Returns
    -------
    StudyResult
        As :func:`resonance.assessment.study.run_study` without the IEC 60909 cross-check (the
        proposal does not use it); the same object for the same variant, so a caller
        must not change it.
    """
    from resonance.assessment.study import run_study  # noqa: PLC0415

    key = _variant_key(variant)
    if key not in model.cache:
        model.cache[key] = run_study(variant, model=model, cross_check=False)
    return model.cache[key]


def _variant_key(variant) -> tuple:
    return ("study", variant.model_dump_json())


def _reactor_figures(status: dict, q_np: np.ndarray, ratings, p: float, u_kv: float, reactor_q: float,
                     st: DetuningSettings) -> list[dict]:
    """Per-stage reactor duty from the re-check's bank currents."""
    n = q_np.size
    i_rms = np.zeros(n)
    orders = sorted({int(k) for sc in status["scenarios"].values() for r in sc["steps"] for k in r["i_bank_h_a"]})
    i_h = np.zeros((n, len(orders)))
    i_fund = np.zeros(n)
    for sc in status["scenarios"].values():
        rms = np.array([r["bank_i_rms_a"] for r in sc["steps"]], float)
        hm = np.array([[r["i_bank_h_a"].get(str(h), 0.0) for h in orders] for r in sc["steps"]], float)
        hm = hm.reshape(n, len(orders))
        fund = np.sqrt(np.maximum(rms**2 - np.sum(hm**2, axis=1), 0.0))
        i_rms = np.maximum(i_rms, stage_share_max(q_np, rms))
        i_fund = np.maximum(i_fund, stage_share_max(q_np, fund))
        if orders:
            i_h = np.maximum(i_h, stage_share_max(q_np, hm))
    out = []
    for k in range(n):
        i1 = float(ratings.q_net_kvar[k] / (math.sqrt(3.0) * u_kv))  # kvar / kV = A
        i_lin = st.linearity_factor * i1
        crest_sum = float(i_fund[k] + np.sum(i_h[k]))  # arithmetic sum of rms magnitudes = crest / sqrt2
        q_l = 3.0 * i1**2 * float(ratings.x_l_ohm[k]) / 1000.0
        heat = (i_rms[k] / i1) ** 2 if i1 > 0 else float("nan")
        row = {"stage": k + 1, "q_net_kvar": _r(ratings.q_net_kvar[k], 3), "q_nameplate_kvar": _r(q_np[k], 3),
               "x_c_ohm": _r(ratings.x_c_ohm[k], 5), "x_l_ohm": _r(ratings.x_l_ohm[k], 5),
               "l_mh": _r(ratings.l_mh[k], 5), "i1_a": _r(i1, 3), "i_rms_max_a": _r(i_rms[k], 3),
               "i_h_max_a": {str(h): _r(i_h[k, j], 3) for j, h in enumerate(orders)},
               "i_rms_over_i1": _r(i_rms[k] / i1 if i1 > 0 else float("nan"), 4),
               "i_lin_a": _r(i_lin, 3), "i_crest_over_sqrt2_a": _r(crest_sum, 3),
               "linearity_ok": bool(crest_sum <= i_lin), "reactor_kvar": _r(q_l, 4),
               "loss_w_from_q": _r(1000.0 * q_l * heat / reactor_q, 2)}
        if st.reactor_loss_w_per_kvar is not None:
            row["loss_w_rated"] = _r(st.reactor_loss_w_per_kvar * ratings.q_net_kvar[k], 2)
            row["loss_w_duty"] = _r(st.reactor_loss_w_per_kvar * ratings.q_net_kvar[k] * heat, 2)
        out.append(row)
    return out


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


def detuned_bank_findings(case, sources, characteristic, scans) -> list[dict]:
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
    out = []
    for sc in scans:
        bm = sc.bank
        if sc.scenario != "nominal" or bm.p <= 0:
            continue
        n = 1.0 / math.sqrt(bm.p)
        why = tuning_reasons(n, sig[0] if sig else None, st)
        if not why:
            continue
        for s in sc.steps:
            out.append({"bank": bm.name, "step": s.step, "scenario": "all", "check": "detuning_tuning",
                        "value": _r(n, 4), "limit": _r(sig[0] * (1.0 - st.order_margin_pct / 100.0), 4),
                        "unit": "harmonic order", "cause": "bank",
                        "source": "IEEE Std 1531-2020; margins common practice ([detuning] settings)",
                        "message": f"bank {bm.name} step {s.step}: detuned p = {100 * bm.p:g} % is unsafe: "
                                   + "; ".join(why)})
    return out


def _prescreen(case, bank, bm, sc_mva: dict, n_req: float, q_net_stage: np.ndarray, sig: tuple,
               st: DetuningSettings):
    """Ratings and tolerance checks of one tuning order before any re-check.

    Returns ``(cand, why, rate, kv0, p_pct)``: the candidate's figures so far, the
    reasons it fails the pre-screen (empty: it goes to the re-check), the rating
    function ``rate(kv) -> (q_np, DetunedStep, tolerance)`` and the first
    capacitor rating [kV] and detuning [%].  ``sc_mva`` maps each scenario to the
    short-circuit power at the bank bus [MVA].
    """
    f_hz = float(case.frequency_hz)
    u = bm.bus_kv
    p_pct = round(100.0 / n_req**2, 2)
    p = p_pct / 100.0
    n = 1.0 / math.sqrt(p)
    u_c1 = u / (1.0 - p)
    kv0 = capacitor_rating_kv(u_c1 * (1.0 + st.cap_voltage_margin_pct / 100.0), st.standard_cap_kv, st.mv_cap_step_kv)
    h_low = sig[0] if sig else None
    n_lo, n_hi = tuning_band(n, st.cap_tolerance_pct, st.reactor_tolerance_pct)
    why = tuning_reasons(n, h_low, st)
    cand = {"tuning_order": _r(n, 4), "detuning_pct": p_pct, "f_tuning_hz": _r(n * f_hz, 2),
            "u_cap_fundamental_kv": _r(u_c1, 5), "lowest_significant_order": h_low,
            "tolerance": {"cap_pct": list(st.cap_tolerance_pct), "reactor_pct": list(st.reactor_tolerance_pct),
                          "n_band": [_r(n_lo), _r(n_hi)], "hp_band": {}, "touches": []}}

    def rate(kv: float) -> tuple[np.ndarray, DetunedStep, dict]:
        q_np = np.round(nameplate_kvar(q_net_stage, kv, u, p), 1)
        rt = detuned_step(q_np, kv, p, f_hz, u)
        hp = {}
        touch = set()
        for name, s_sc in sc_mva.items():
            q_cap_bus = np.cumsum(q_np) * (u / kv) ** 2
            lo, hi, nom = parallel_band(p, q_cap_bus, s_sc * 1000.0, st.cap_tolerance_pct,
                                        st.reactor_tolerance_pct)
            hp[name] = {"min": _r(lo), "max": _r(hi), "nominal": _r(nom)}
            for a_, b_ in zip(lo, hi):
                touch |= set(_touches(float(a_), float(b_), sig, st.band_margin_pct))
        return q_np, rt, {"hp_band": hp, "touches": sorted(touch)}

    q_np, rt, tol = rate(kv0)
    cand["tolerance"].update(tol)
    if tol["touches"]:
        why.append(f"a parallel resonance band touches significant order(s) {tol['touches']}")
    cand.update({"rated_kv": kv0, "cap_overrating": _r(kv0 / u_c1, 4), "steps_kvar": [float(x) for x in q_np],
                 "stages": None, "recheck": None, "reactor_q": bank.reactor_q})
    if why:
        cand.update({"qualified": False, "why": "rejected before re-check: " + "; ".join(why)})
        cand["stages"] = [{"stage": k + 1, "q_net_kvar": _r(rt.q_net_kvar[k], 3), "q_nameplate_kvar": _r(q_np[k], 3),
                           "x_c_ohm": _r(rt.x_c_ohm[k], 5), "x_l_ohm": _r(rt.x_l_ohm[k], 5),
                           "l_mh": _r(rt.l_mh[k], 5)} for k in range(q_np.size)]
    return cand, why, rate, kv0, p_pct


def _ratings(kv0: float, u_kv: float, st: DetuningSettings) -> list[float]:
    """Capacitor ratings a candidate is re-checked at, lowest first [kV]."""
    out = []
    for kv in _next_ratings(kv0, st.standard_cap_kv, st.mv_cap_step_kv, st.max_rating_steps):
        if kv / u_kv > 1.6:  # the case schema's sanity range for rated_kv
            break
        out.append(kv)
    return out


def _candidate(case, model, bank, bm, scans: dict, n_req: float, q_net_stage: np.ndarray, sig: tuple,
               st: DetuningSettings, clock: list) -> dict:
    u = bm.bus_kv
    cand, why, rate, kv0, p_pct = _prescreen(case, bank, bm, {k: sc.sc_mva for k, sc in scans.items()}, n_req,
                                             q_net_stage, sig, st)
    if why:
        return cand
    p = p_pct / 100.0
    u_c1 = u / (1.0 - p)
    tried = []
    status = None
    for kv in _ratings(kv0, u, st):
        q_np, rt, tol = rate(kv)
        try:
            variant = _variant(case, bank, detuning_pct=p_pct, rated_kv=kv, steps_kvar=[float(x) for x in q_np])
            res = _run(variant, model, clock)
        except (InputError, ModelError) as e:
            why.append(f"re-check at {kv:g} kV could not run ({e})")
            break
        status = _bank_status(res, variant, model, bank.name)
        tried.append(kv)
        if status["passes"] or not (status["resonance_ok"] and status["pcc_ok"]):
            break
    if status is None:
        cand.update({"qualified": False, "why": "; ".join(why) or "no rating could be re-checked"})
        return cand
    worst = {}
    for sc_name, sc in status["scenarios"].items():
        rows = sc["steps"]
        worst[sc_name] = {k: max(r[k] for r in rows) for k in ("cap_v_rms_pct", "cap_v_peak_pct", "cap_i_rms_pct",
                                                              "cap_kvar_pct")}
        worst[sc_name]["duty_margin_pct"] = min(r["duty_margin_pct"] for r in rows)
    kv = tried[-1]
    v_rms = max(w["cap_v_rms_pct"] for w in worst.values())
    v_pk = max(w["cap_v_peak_pct"] for w in worst.values())
    cand["tolerance"].update(tol)
    cand.update({
        "rated_kv": kv, "cap_overrating": _r(kv / u_c1, 4), "steps_kvar": [float(x) for x in q_np],
        "ratings_tried_kv": tried, "cap_v_rms_max_kv": _r(v_rms / 100.0 * kv, 5),
        "cap_v_peak_max_kv": _r(v_pk / 100.0 * kv * math.sqrt(2.0), 5),
        "duty_margin_min_pct": _r(min(w["duty_margin_pct"] for w in worst.values()), 3),
        "worst": worst,
        "stages": _reactor_figures(status, q_np, rt, p, u, bank.reactor_q, st),
        "recheck": status,
    })
    cand["reactor_i_rms_over_i1_max"] = max(s_["i_rms_over_i1"] for s_ in cand["stages"])
    if tol["touches"]:
        why.append(f"a parallel resonance band touches significant order(s) {tol['touches']}")
    if not status["passes"]:
        why += status["problems"][:6]
        if len(status["problems"]) > 6:
            why.append(f"... {len(status['problems']) - 6} more")
    ok = not why
    cand["qualified"] = ok
    cand["why"] = ("passes every step in every scenario" if ok else "; ".join(why))
    return cand


def _ordinal(h) -> str:
    if h is None:
        return "lowest significant"
    h = int(h)
    suf = "th" if 10 <= h % 100 <= 20 else {1: "st", 2: "nd", 3: "rd"}.get(h % 10, "th")
    return f"{h}{suf}"


def _window_distance(n: float, h_low) -> float:
    """Distance of n from the usual tuning window, 4.0-4.4 for a 5th (scaled to the lowest significant order)."""
    if h_low is None:
        return 0.0
    lo, hi = 0.80 * h_low, 0.88 * h_low  # REFERENCES.md: usually tuned 4.0-4.4 [published], scaled (derived)
    return max(lo - n, 0.0, n - hi)


def _rank_key(c: dict):
    return (round(_window_distance(c["tuning_order"], c["lowest_significant_order"]), 3), c["rated_kv"],
            round(c["reactor_i_rms_over_i1_max"], 3), -c["duty_margin_min_pct"])


def _rearrangement(case, model, result, bank, bm, scans: dict, st: DetuningSettings, clock: list) -> dict:
    """Another split of the same total into stages, every state clear of the orders of concern."""
    margin = case.study.margin_pct
    orders = np.array([h for h, _ in result.orders.all()], float)
    stages = np.asarray(bank.steps_kvar, float)
    total = float(stages.sum())
    n_max = int(stages.size)
    unit = st.rearrange_unit_kvar or _nice_unit(total / (4.0 * n_max))
    n_units = max(1, int(round(total / unit)))
    n_units = min(n_units, 400)
    unit = total / n_units
    c = np.arange(1, n_units + 1)
    q_bus = c * unit * (bm.bus_kv / bm.rated_kv) ** 2  # capacitor kvar at the bus voltage
    allowed = np.ones(n_units, bool)
    blocking = []
    for name, sc in scans.items():
        qs = sc.bank.q_cap_nominal_kvar()
        ratio = np.array([(s.h_scan / s.h_estimate) if s.h_scan else np.nan for s in sc.steps], float)
        good = np.isfinite(ratio)
        corr = np.interp(q_bus, qs[good], ratio[good]) if good.any() else np.ones_like(q_bus)
        h_est = 1.0 / np.sqrt(bm.p + q_bus / (sc.sc_mva * 1000.0)) * corr  # screening.h_estimate, vectorised
        if orders.size:
            dist = np.min(np.abs(h_est[:, None] - orders[None, :]) / orders[None, :], axis=1) * 100.0
            ok = dist > margin
        else:
            ok = np.ones(n_units, bool)
        allowed &= ok
        if not ok[-1]:
            j = int(np.argmin(np.abs(h_est[-1] - orders) / orders))
            blocking.append(f"the full bank ({total:g} kvar) resonates near h = {h_est[-1]:.2f} ({name} supply), "
                            f"within {margin:g} % of order {int(orders[j])}")
    out = {"unit_kvar": _r(unit, 3), "total_kvar": total, "max_stages": n_max, "estimate":
           "h = sqrt(S_sc/Q) x (h_scan/h_estimate of the bank as given, interpolated in Q)"}
    sizes = rearrange_stages(allowed, n_max)
    if sizes is None:
        out.update({"exists": False, "steps_kvar": None,
                    "reason": "; ".join(blocking) or "no split of the total keeps every state clear of the orders "
                                                      f"of concern by {margin:g} %"})
        return out
    steps = [float(round(s_ * unit, 3)) for s_ in sizes]
    out.update({"exists": True, "steps_kvar": steps, "states_kvar": [float(x) for x in np.cumsum(steps)]})
    try:
        variant = _variant(case, bank, steps_kvar=steps)
        status = _bank_status(_run(variant, model, clock), variant, model, bank.name)
    except (InputError, ModelError) as e:
        out.update({"confirmed": False, "reason": f"re-check could not run ({e})"})
        return out
    out["confirmed"] = bool(status["resonance_ok"])
    out["qualified"] = bool(status["passes"])
    out["recheck"] = status
    notes = []
    if steps[0] < total / n_max:
        notes.append(f"the first stage ({steps[0]:g} kvar) is small: its resonance is high and sensitive to the "
                     "supply strength")
    if not status["resonance_ok"]:
        notes.append("the full study does not confirm the hand estimate: " + "; ".join(
            p_ for p_ in status["problems"] if "resonance" in p_)[:400])
    if not status["duty_ok"] or not status["pcc_ok"]:
        notes.append("re-arranging does not cure the duty or PCC problems: " + "; ".join(
            p_ for p_ in status["problems"] if "resonance" not in p_)[:400])
    out["reason"] = "; ".join(notes) or "every state passes the full study"
    return out


def _trial_orders(st: DetuningSettings, sig: tuple) -> list[float]:
    """Tuning orders to try, in the order they are tried [unitless]."""
    orders = list(st.tuning_orders)
    if st.search == "continuous" and sig:
        kc, kl = _corners(st.cap_tolerance_pct, st.reactor_tolerance_pct)
        n_star = min(sig[0] * (1.0 - st.order_margin_pct / 100.0),
                     sig[0] * (1.0 - st.band_margin_pct / 100.0) * math.sqrt(float(np.min(kc * kl))))
        p_star = math.ceil(10000.0 / n_star**2) / 100.0  # rounded up: the order stays at or below n*
        orders.append(1.0 / math.sqrt(p_star / 100.0))
    trial = sorted(set(orders), reverse=True)
    if st.recheck == "first":  # most promising first: inside the usual window, nearest its middle
        h_low = sig[0] if sig else None
        mid = 0.84 * h_low if h_low else 0.0
        trial.sort(key=lambda n_: (round(_window_distance(n_, h_low), 6), abs(n_ - mid)))
    return trial


def propose_detuning(case, model, result) -> dict:
    """Detuned-bank proposals (and stage re-arrangements) for every bank of a case.

    Parameters
    ----------
    case : Case
        The case as given.
    model : PlantModel or None
        The plant model used for ``result`` (re-used for every re-check; the
        model does not depend on the banks).  None: taken from ``result``.
    result : StudyResult
        The study of ``case`` as given.

    Returns
    -------
    dict
        Bank name -> plain dict with keys ``status`` ("proposed", "skipped"),
        ``recommended`` (``tuning_order`` [unitless], ``detuning_pct`` [%],
        ``rated_kv`` [kV], ``steps_kvar`` [kvar] nameplate per stage,
        ``reactor_q`` [unitless], ``bank_table`` ready for a ``[[bank]]`` entry)
        or None, ``reason`` (plain words), ``candidates`` (every figure,
        ``qualified``, ``why``), ``rearrangement`` (or None), ``settings`` and
        ``re_checks`` [unitless].

    Notes
    -----
    A candidate qualifies when its nominal tuning is at least
    ``order_margin_pct`` below the lowest significant harmonic, its tolerance
    band at least ``band_margin_pct`` below it, no parallel-resonance band
    touches a significant order, and the full study with the detuned bank has,
    on every step of every scenario, no resonance finding, capacitor duty
    within limits, and no IEEE 519 PCC figure over its limit that is worse
    than with the bank off.  Qualified candidates are ranked by distance from
    the usual tuning window (4.0-4.4 for a 5th), capacitor rated voltage,
    reactor rms over fundamental current (harmonic absorption), duty margin.

    References
    ----------
    REFERENCES.md "Detuned (series reactor) banks"; IEEE Std 1531-2020;
    IEEE Std 18-2002; IEEE Std 519-2014.
    """
    st = detuning_settings(case)
    if model is None:
        model = result.extras.get("model")
    sources = result.extras.get("sources", [])
    background = dict(case.supply.background_pct) if case.supply else {}
    sig = significant_orders(sources, background, st, fallback=result.orders.characteristic)
    settings_out = {k: (list(v) if isinstance(v, tuple) else v) for k, v in asdict(st).items()}
    settings_out["significant_orders"] = list(sig)
    settings_out["sources"] = SETTING_SOURCES
    out = {}
    for bank in case.bank:
        clock: list[float] = []
        scans = {sc.scenario: sc for sc in result.scans if sc.bank.name == bank.name}
        bm = scans["nominal"].bank
        own = _bank_status(result, case, model, bank.name)
        entry = {"status": "proposed", "recommended": None, "reason": "", "candidates": [], "rearrangement": None,
                 "settings": settings_out, "bank_as_given": {"passes": own["passes"], "problems": own["problems"]}}
        if bm.p > 0 and own["passes"]:
            entry.update({"status": "skipped", "reason": f"bank {bank.name} is already detuned "
                          f"(p = {100 * bm.p:g} %) and passes every step; no proposal needed"})
            out[bank.name] = entry
            continue
        q_net_stage = bm.stages_kvar * (bm.bus_kv / bm.rated_kv) ** 2 / (1.0 - bm.p)
        cands = []
        for n_req in _trial_orders(st, sig):
            c = _candidate(case, model, bank, bm, scans, n_req, q_net_stage, sig, st, clock)
            cands.append(c)
            if st.recheck == "first" and c["qualified"]:
                break
        entry["candidates"] = cands
        good = sorted((c for c in cands if c["qualified"]), key=_rank_key)
        if good:
            b = good[0]
            entry["recommended"] = {
                "tuning_order": b["tuning_order"], "detuning_pct": b["detuning_pct"], "rated_kv": b["rated_kv"],
                "steps_kvar": b["steps_kvar"], "reactor_q": b["reactor_q"], "f_tuning_hz": b["f_tuning_hz"],
                "l_mh_per_stage": [s_["l_mh"] for s_ in b["stages"]],
                "reactor_i_rms_max_a": [s_["i_rms_max_a"] for s_ in b["stages"]],
                "reactor_i_lin_a": [s_["i_lin_a"] for s_ in b["stages"]],
                "bank_table": {"name": bank.name, "bus": bank.bus, "rated_kv": b["rated_kv"],
                               "steps_kvar": b["steps_kvar"], "detuning_pct": b["detuning_pct"],
                               "reactor_q": b["reactor_q"]},
            }
            others = [c for c in good[1:]]
            listed = ", ".join(f"{c['tuning_order']:.2f}" for c in others)
            alt = (f"; of the other qualifying orders ({listed}) "
                   "none sits as well in the usual tuning window with as low a capacitor rating and reactor "
                   "loading") if others else ""
            h_low = b["lowest_significant_order"]
            entry["reason"] = (
                f"Tuning order {b['tuning_order']:.2f} (p = {b['detuning_pct']:g} %, {b['f_tuning_hz']:.0f} Hz) stays "
                f"below the {_ordinal(h_low)} harmonic even at the tolerance limits (band {b['tolerance']['n_band'][0]:.2f}-"
                f"{b['tolerance']['n_band'][1]:.2f}) and passes every step in every supply scenario with "
                f"{b['rated_kv'] * 1000:g} V capacitors (duty margin {b['duty_margin_min_pct']:.1f} %, reactor "
                f"rms current up to {b['reactor_i_rms_over_i1_max']:.2f} x fundamental){alt}.")
        else:
            entry["reason"] = ("No tuning order qualifies: " + " | ".join(
                f"{c['tuning_order']:.2f}: {c['why']}" for c in cands))[:2000]
        if not own["resonance_ok"] and bm.p == 0:
            entry["rearrangement"] = _rearrangement(case, model, result, bank, bm, scans, st, clock)
        entry["re_checks"] = len(clock)  # studies run for this bank (no wall-clock time: equal runs stay equal)
        out[bank.name] = entry
    return out
