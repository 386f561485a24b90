"""Checks of a schema-valid case that need the whole case, and non-fatal hints.

Names, buses and voltages (:func:`check_case`, :func:`bus_voltages_kv`,
:func:`bus_kv_problems`), a validation-time short-circuit estimate (:func:`sc_kva_estimate`)
and the hints about likely mistakes in a valid case (:func:`case_hints`: a stage of 0.1 kvar,
a bank larger than its transformer, voltages typical of the other supply frequency), returned
as ``InputProblem`` lines for the caller to print as warnings.  Pure functions.
"""

from __future__ import annotations

import difflib
import math
from collections import deque
from typing import Any

import numpy as np

from resonance.errors import InputProblem
from resonance.inputs.case import Bank, Case
from resonance.names import file_stem
from resonance.standards.impedance import split_by_x_r

__all__ = ["check_case", "bus_voltages_kv", "bus_kv_problems", "sc_kva_estimate", "case_hints",
           "STAGE_MIN_KVAR", "DEMAND_MIN_KVA"]

#: fault current above which a supply short-circuit power is taken to be in kVA [kA]
#: (common practice: public supplies rarely exceed about 100 kA; 300 kA leaves room)
_I_SC_MAX_KA = 300.0


def _is_num(x: Any) -> bool:
    return isinstance(x, (int, float)) and not isinstance(x, bool) and math.isfinite(x)



#: highest nominal voltage a case accepts [kV] (the schema's upper bound; the highest
#: IEC 60038 level is 765/800 kV)
_KV_MAX = 800.0


def _looks_like_volts(v: Any) -> bool:
    """A finite number above 1000 whose value in kV would be a usable voltage (so the hint is one)."""
    return _is_num(v) and 1000.0 < v <= 1000.0 * _KV_MAX


def _volts_hint(file: str, field: str, v: float) -> InputProblem:
    return InputProblem(file, field, f"{v:g} kV looks like a value in volts; give kV (e.g. {v / 1000:g})")




# ---------------------------------------------------------------- physical checks

def _names_unique(case: Case, file: str) -> list[InputProblem]:
    probs = []
    for table in ("transformer", "cable", "load", "harmonic_source", "bank"):
        seen: dict[str, int] = {}
        for i, item in enumerate(getattr(case, table)):
            if item.name in seen:
                probs.append(InputProblem(file, f"{table}[{i}].name",
                                          f"duplicate name {item.name!r} (also {table}[{seen[item.name]}])"))
            else:
                seen[item.name] = i
    # bank names become output file names (scan_<name>.csv, scan_<name>_weak.csv, ...): names that
    # map to the same file name, also on a case-insensitive file system, would overwrite each other
    files: dict[str, int] = {}
    for i, bk in enumerate(case.bank):
        key = file_stem(bk.name).casefold()
        j = files.get(key)
        if j is not None and case.bank[j].name != bk.name:
            probs.append(InputProblem(file, f"bank[{i}].name", f"{bk.name!r} gives the same output file names as "
                                      f"bank[{j}] {case.bank[j].name!r}; choose names that differ in letters or digits"))
        files.setdefault(key, i)
    for i, bk in enumerate(case.bank):
        key = file_stem(bk.name).casefold()
        if key.endswith("_weak") and key[: -len("_weak")] in files:
            j = files[key[: -len("_weak")]]
            probs.append(InputProblem(file, f"bank[{i}].name", f"{bk.name!r} collides with the weak-supply outputs "
                                      f"of bank[{j}] {case.bank[j].name!r}; choose another name"))
    return probs


def bus_voltages_kv(case: Case) -> tuple[dict[str, float], list[InputProblem]]:
    """Nominal voltage of every bus, propagated from the supply through the network.

    Parameters
    ----------
    case : Case
        A case built from tables (no network file).

    Returns
    -------
    dict
        Bus name -> nominal voltage [kV] for every bus reachable from the supply.
    list of InputProblem
        Transformer windings whose rated voltage does not match the bus
        (more than 10 % apart, common practice for a tap range) and buses that
        cannot be reached from the supply.
    """
    file = case.source_file
    probs: list[InputProblem] = []
    kv: dict[str, float] = {}
    if case.supply is None:
        return kv, probs
    adj: dict[str, list[tuple[str, str, int, str]]] = {}
    for i, t in enumerate(case.transformer):
        adj.setdefault(t.hv_bus, []).append((t.lv_bus, "transformer", i, "hv"))
        adj.setdefault(t.lv_bus, []).append((t.hv_bus, "transformer", i, "lv"))
    for i, c in enumerate(case.cable):
        adj.setdefault(c.from_bus, []).append((c.to_bus, "cable", i, ""))
        adj.setdefault(c.to_bus, []).append((c.from_bus, "cable", i, ""))
    kv[case.supply.bus] = case.supply.kv
    queue = deque([case.supply.bus])
    while queue:
        b = queue.popleft()
        for other, kind, i, side in adj.get(b, []):
            if kind == "transformer":
                t = case.transformer[i]
                here_kv = t.hv_kv if side == "hv" else t.lv_kv
                there_kv = t.lv_kv if side == "hv" else t.hv_kv
                if abs(here_kv - kv[b]) > 0.10 * kv[b]:
                    probs.append(InputProblem(file, f"transformer[{i}].{side}_kv",
                                              f"{here_kv} kV does not match bus {b!r} at {kv[b]:g} kV"))
                if other in kv:
                    if abs(kv[other] - there_kv) > 0.10 * kv[other]:
                        oside = "lv" if side == "hv" else "hv"
                        probs.append(InputProblem(file, f"transformer[{i}].{oside}_kv",
                                                  f"{there_kv} kV does not match bus {other!r} at {kv[other]:g} kV"))
                    continue
                kv[other] = there_kv
            else:
                if other in kv:
                    if abs(kv[other] - kv[b]) > 0.10 * kv[b]:
                        probs.append(InputProblem(file, f"cable[{i}]",
                                                  f"joins bus {b!r} ({kv[b]:g} kV) and bus {other!r} ({kv[other]:g} kV)"))
                    continue
                kv[other] = kv[b]
            queue.append(other)
    # a mismatch is seen from both ends of the branch: report it once per field
    first: dict[str, InputProblem] = {}
    for pr in probs:
        first.setdefault(pr.field, pr)
    return kv, list(first.values())


def check_case(case: Case) -> list[InputProblem]:
    """Physical sanity checks that need the whole case (names, buses, voltages).

    Parameters
    ----------
    case : Case
        Schema-valid case.

    Returns
    -------
    list of InputProblem
        Empty when the case is consistent.

    Notes
    -----
    Rules: unique names per table, and bank names that give distinct output
    file names; no cable with zero series impedance; demand given once; a
    supply (or a network file); every named bus exists (with the closest name
    as a hint) and is connected to the supply; transformer windings and cables
    match the voltages of their buses (10 %); a ``demand.bank`` that exists; the
    voltage checks of :func:`bus_kv_problems` (bank rating 0.85 to 1.6 times its
    bus voltage, a value in volts named as such; stages of at least
    :data:`STAGE_MIN_KVAR` at the bus voltage; a demand current of at least
    :data:`DEMAND_MIN_KVA`); a bank not below the
    short-circuit power at its bus (``h_r = sqrt(S_sc/Q) <= 1``); harmonic
    orders and angles within the scan and with a magnitude.
    """
    file = case.source_file
    probs = _names_unique(case, file)
    for i, c in enumerate(case.cable):
        if c.length_m * math.hypot(c.r_ohm_per_km, c.x_ohm_per_km) == 0.0:
            fld = "length_m" if c.length_m == 0 else "r_ohm_per_km"
            probs.append(InputProblem(file, f"cable[{i}].{fld}",
                                      "the cable has zero series impedance; a cable without impedance is a busbar: "
                                      "put the equipment on one bus, or give the real length and impedance"))
    st = case.study
    if st.max_demand_kw is not None and st.max_demand_a is not None:
        probs.append(InputProblem(file, "study.max_demand_a", "give either max_demand_kw or max_demand_a, not both"))
    if case.demand is not None and case.demand.bank is not None and case.demand.bank not in {b.name for b in case.bank}:
        probs.append(InputProblem(file, "demand.bank", f"no bank named {case.demand.bank!r} (banks: "
                                  + ", ".join(repr(b.name) for b in case.bank) + ")"))
    names = {b.name for b in case.bank}
    for i, b in enumerate(case.bank):
        for j, other in enumerate(b.runs_with):
            if other not in names:
                probs.append(InputProblem(file, f"bank[{i}].runs_with[{j}]", f"no bank named {other!r} (banks: "
                                          + ", ".join(repr(n) for n in sorted(names)) + ")"))
    ft = getattr(case, "filter", None)
    for j, other in enumerate((ft.banks or []) if ft is not None else []):
        if other not in names:
            probs.append(InputProblem(file, f"filter.banks[{j}]", f"no bank named {other!r} (banks: "
                                      + ", ".join(repr(n) for n in sorted(names)) + ")"))
    if case.network is None:
        if case.supply is None:
            probs.append(InputProblem(file, "supply", "required (or give [network] pandapower_json)"))
            return probs
        kv, vprobs = bus_voltages_kv(case)
        probs += vprobs
        known = set(kv)
        defined = {case.supply.bus}
        for t in case.transformer:
            defined |= {t.hv_bus, t.lv_bus}
        for c in case.cable:
            defined |= {c.from_bus, c.to_bus}
        for table, key in (("load", "bus"), ("harmonic_source", "bus"), ("bank", "bus")):
            for i, item in enumerate(getattr(case, table)):
                b = getattr(item, key)
                if b not in defined:
                    probs.append(InputProblem(file, f"{table}[{i}].{key}", _no_bus(b, defined)))
                elif b not in known:
                    probs.append(InputProblem(file, f"{table}[{i}].{key}", f"bus {b!r} is not connected to the supply"))
        for table, a, b in (("transformer", "hv_bus", "lv_bus"), ("cable", "from_bus", "to_bus")):
            for i, item in enumerate(getattr(case, table)):
                for key in (a, b):
                    if getattr(item, key) not in known:
                        probs.append(InputProblem(file, f"{table}[{i}].{key}",
                                                  f"bus {getattr(item, key)!r} is not connected to the supply"))
        probs += bus_kv_problems(case, {b: v for b, v in kv.items()}, pcc_bus=case.pcc_bus)
        if st.pcc_bus and st.pcc_bus not in defined:
            probs.append(InputProblem(file, "study.pcc_bus", _no_bus(st.pcc_bus, defined)))
        elif st.pcc_bus and st.pcc_bus not in known:
            probs.append(InputProblem(file, "study.pcc_bus", f"bus {st.pcc_bus!r} is not connected to the supply"))
        if not probs:
            probs += _bank_beyond_supply(case, kv)
    for i, hs in enumerate(case.harmonic_source):
        for h in list(hs.spectrum.items()) if isinstance(hs.spectrum, dict) else []:
            if h[0] > st.h_max:
                probs.append(InputProblem(file, f"harmonic_source[{i}].spectrum",
                                          f"order {h[0]} is above the scan range h_max = {st.h_max:g}"))
        for h in hs.phase_deg:
            if isinstance(hs.spectrum, dict) and h not in hs.spectrum:
                probs.append(InputProblem(file, f"harmonic_source[{i}].phase_deg",
                                          f"order {h} has an angle but no magnitude in the spectrum"))
    if case.supply is not None:
        for h in case.supply.background_pct:
            if h > st.h_max:
                probs.append(InputProblem(file, "supply.background_pct",
                                          f"order {h} is above the scan range h_max = {st.h_max:g}"))
        for h in case.supply.background_phase_deg:
            if h not in case.supply.background_pct:
                probs.append(InputProblem(file, "supply.background_phase_deg",
                                          f"order {h} has an angle but no magnitude in background_pct"))
    return probs


#: smallest stage output at the bus nominal voltage that the study takes [kvar] (project choice:
#: the detuned-bank proposals state nameplate stages in 0.1 kvar steps, and a stage must not
#: round to nothing; real low-voltage capacitor units start at about 1 kvar)
STAGE_MIN_KVAR = 0.05
#: smallest maximum demand at the point of common coupling [kVA] (project choice: the IEEE 519
#: current limits are per cent of this demand, and a service with a capacitor bank draws far
#: more; a smaller value is a unit mistake and would make every per-cent figure meaningless)
DEMAND_MIN_KVA = 1.0


def bus_kv_problems(case: Case, kv: dict[str, float], pcc_bus: str = "") -> list[InputProblem]:
    """Checks that need the nominal voltage of the banks' buses and of the PCC.

    Used for table-built cases (voltages from :func:`bus_voltages_kv`) and, once the
    network file is read, for network-file cases (voltages from the file's bus table).

    Parameters
    ----------
    case : Case
        Schema-valid case.
    kv : dict
        Bus name -> nominal line-to-line voltage [kV]; buses left out are not checked.
    pcc_bus : str
        Bus of the point of common coupling, for the demand check ("" for none) [unitless].

    Returns
    -------
    list of InputProblem
        A bank rating outside 0.85 to 1.6 times its bus voltage (a value in volts is named
        as such); a stage delivering less than :data:`STAGE_MIN_KVAR` at the bus voltage; a
        ``study.max_demand_a`` below :data:`DEMAND_MIN_KVA` at the PCC voltage.

    Notes
    -----
    A stage of ``Q_R`` at rated voltage ``U_R`` delivers ``Q = Q_R (U_n / U_R)^2`` at the bus
    nominal voltage ``U_n``; a demand current ``I`` is ``S = sqrt(3) U_n I`` at the PCC.

    References
    ----------
    IEEE Std 18-2012, clause 5 (capacitor output proportional to the square of the voltage).
    """
    file = case.source_file
    probs: list[InputProblem] = []
    for i, bk in enumerate(case.bank):
        u = kv.get(bk.bus)
        if u is None or not (math.isfinite(u) and u > 0):
            continue
        ratio = bk.rated_kv / u
        if 0.85 <= ratio / 1000.0 <= 1.6:
            probs.append(_volts_hint(file, f"bank[{i}].rated_kv", bk.rated_kv))
            continue
        if not (0.85 <= ratio <= 1.6):
            probs.append(InputProblem(file, f"bank[{i}].rated_kv",
                                      f"{bk.rated_kv:g} kV does not suit bus {bk.bus!r} at {u:g} kV "
                                      "(expected 0.85 to 1.6 times the bus voltage)"))
            continue
        for k, q in enumerate(bk.steps_kvar):
            q_bus = q / ratio**2
            if q_bus < STAGE_MIN_KVAR:
                at = "" if ratio == 1.0 else f" ({q_bus:.3g} kvar at the bus's {u:g} kV)"
                probs.append(InputProblem(file, f"bank[{i}].steps_kvar",
                                          f"stage {k + 1} is {q:g} kvar{at}; the smallest stage the study takes is "
                                          f"{STAGE_MIN_KVAR:g} kvar at the bus voltage (stages are kvar, not Mvar)"))
                break
    st = case.study
    u_pcc = kv.get(pcc_bus)
    if st.max_demand_a is not None and u_pcc is not None and math.isfinite(u_pcc) and u_pcc > 0:
        s_kva = math.sqrt(3.0) * u_pcc * st.max_demand_a
        if s_kva < DEMAND_MIN_KVA:
            probs.append(InputProblem(file, "study.max_demand_a",
                                      f"{st.max_demand_a:g} A at {u_pcc:g} kV is a demand of {s_kva:.3g} kVA; the "
                                      f"maximum demand must be at least {DEMAND_MIN_KVA:g} kVA (the IEEE 519 current "
                                      "limits are per cent of it; check the unit: A, not kA)"))
    return probs


def _no_bus(name: str, defined: set[str]) -> str:
    """'bus ... does not exist' with the closest names as a hint."""
    close = difflib.get_close_matches(name, sorted(defined), n=1, cutoff=0.6)
    if not close:
        close = [d for d in sorted(defined) if d.casefold() == name.casefold()]
    hint = f"; did you mean {close[0]!r}?" if close else ""
    shown = sorted(defined)
    listed = ", ".join(repr(b) for b in shown[:12]) + (", ..." if len(shown) > 12 else "")
    return f"bus {name!r} does not exist{hint} (buses: {listed})"


def sc_kva_estimate(case: Case, kv: dict[str, float] | None = None) -> dict[str, float]:
    """Short-circuit power at every bus of a table-built case, loads excluded.

    Parameters
    ----------
    case : Case
        Schema-valid case with a supply and no network file.
    kv : dict, optional
        Bus name -> nominal voltage [kV] (from :func:`bus_voltages_kv` when None).

    Returns
    -------
    dict
        Bus name -> ``S_sc = U_n^2 / |Z_kk(1)|`` [kVA] for every bus reachable
        from the supply; empty when the nodal matrix cannot be solved.

    Notes
    -----
    Per unit on a 1 MVA base and each bus's nominal voltage: supply
    ``|Z| = 1/S_sc`` split by X/R; transformer ``Z = (z%/100) / S_T`` split by
    X/R; cable ``Z = (r + jx) L / (n U^2)``; shunt capacitance and loads left
    out; nominal ratios.  ``Z_kk`` is the diagonal of the inverse nodal
    admittance matrix.  It is the validation-time estimate used for hints; the
    study's own figure comes from the full harmonic model.

    References
    ----------
    IEC 60909-0:2016, clause 4.2 (short-circuit impedance at the fault
    location, here with c = 1 and no correction factors).
    """
    if case.supply is None or case.network is not None:
        return {}
    if kv is None:
        kv, _ = bus_voltages_kv(case)
    names = sorted(kv)
    idx = {b: k for k, b in enumerate(names)}
    y = np.zeros((len(names), len(names)), complex)

    def branch(a: str, b: str, z: complex) -> None:
        if a in idx and b in idx and z != 0:
            i, j = idx[a], idx[b]
            y[i, i] += 1 / z
            y[j, j] += 1 / z
            y[i, j] -= 1 / z
            y[j, i] -= 1 / z

    s = case.supply
    k0 = idx[s.bus]
    y[k0, k0] += 1 / split_by_x_r(1.0 / s.sc_mva, s.x_r)
    for t in case.transformer:
        branch(t.hv_bus, t.lv_bus, split_by_x_r(t.z_pct / 100.0 / (t.kva / 1000.0), t.x_r))
    for c in case.cable:
        if c.from_bus in kv:
            z_ohm = complex(c.r_ohm_per_km, c.x_ohm_per_km) * c.length_m / 1000.0 / c.parallel
            branch(c.from_bus, c.to_bus, z_ohm / kv[c.from_bus] ** 2)
    try:
        with np.errstate(all="raise"):
            zkk = np.diagonal(np.linalg.inv(y))
    except (np.linalg.LinAlgError, FloatingPointError):
        return {}
    return {b: float(1000.0 / abs(zkk[idx[b]])) for b in names if abs(zkk[idx[b]]) > 0}


def _bank_kvar_at_bus(bk: Bank, bus_kv: float) -> float:
    """Whole bank at the bus nominal voltage, ``Q_R (U_n/U_R)^2`` [kvar]."""
    return float(sum(bk.steps_kvar)) * (bus_kv / bk.rated_kv) ** 2


def _bank_beyond_supply(case: Case, kv: dict[str, float]) -> list[InputProblem]:
    """A bank at least as large as the short-circuit power at its bus resonates at or below the fundamental."""
    sc = sc_kva_estimate(case, kv)
    probs = []
    for i, bk in enumerate(case.bank):
        if bk.bus not in sc or bk.bus not in kv:
            continue
        q = _bank_kvar_at_bus(bk, kv[bk.bus])
        if q >= sc[bk.bus]:
            # h_r = sqrt(S_sc / Q) (REFERENCES.md, resonance) is <= 1 here
            probs.append(InputProblem(
                case.source_file, f"bank[{i}].steps_kvar",
                f"the whole bank ({q:,.0f} kvar at {kv[bk.bus]:g} kV) is not below the short-circuit power at bus "
                f"{bk.bus!r} (about {sc[bk.bus]:,.0f} kVA): it would resonate with the supply at "
                f"h = {math.sqrt(sc[bk.bus] / q):.2f}, at or below the fundamental; check the units of steps_kvar (kvar, not "
                "Mvar), supply.sc_mva (MVA) and transformer kva (kVA)"))
    return probs


#: nominal voltages typical of 60 Hz and of 50 Hz systems [kV] (common practice:
#: North American ANSI C84.1 levels against IEC 60038 levels)
_TYPICAL_KV = {60: (0.208, 0.24, 0.48, 0.6, 2.4, 4.16, 12.47, 13.2, 13.8, 34.5),
               50: (0.4, 0.415, 0.69, 3.3, 6.6, 10.0, 11.0, 20.0, 33.0)}
#: a stage below this is taken to be a value in Mvar [kvar] (common practice:
#: low-voltage PFC stages start at a few kvar)
_STAGE_MIN_KVAR = 1.0
#: voltage-rise share above which a bank gets a hint [unitless]
#: (dV/V ~= Q/S_sc, REFERENCES.md "from memory"; 10 % is common practice for a worry)
_RISE_HINT = 0.10


def _mva_hint(kva: float, small_kva: float) -> str:
    """Hint for a rating below ``small_kva``: in MVA when 1000 times it is a rating, else just tiny."""
    if kva * 1000.0 >= small_kva:
        return f"{kva:g} kVA looks like a value in MVA (give kVA, e.g. {kva * 1000:g})"
    return f"{kva:g} kVA is implausibly small (check the value and its unit, kVA)"


def case_hints(case: Case) -> tuple[InputProblem, ...]:
    """Non-fatal warnings about a valid case that probably holds a mistake.

    Parameters
    ----------
    case : Case
        A case that passed :func:`check_case`.

    Returns
    -------
    tuple of InputProblem
        One line each (file, field, hint).  The study still runs; the caller
        prints these (``warning: <problem>``) and may copy them into the
        results.

    Notes
    -----
    Hints: a supply fault current above 300 kA (MVA given as kVA, or an
    infinite bus); a stage below 1 kvar (Mvar given as kvar); a bank larger than the
    transformers feeding its bus; a bank whose switching would raise the
    voltage by more than 10 % (``dV/V ~= Q/S_sc``); nominal voltages typical of
    the other supply frequency; a transformer under 10 kVA or a harmonic
    source under 1 kVA (MVA given as kVA); a built-in spectrum with orders
    above ``h_max`` (left out of the study).
    """
    file = case.source_file
    out: list[InputProblem] = []
    sup = case.supply
    if sup is not None:
        # far above any public supply's fault current the value was probably given in kVA
        # (a very large value is also the usual stand-in for an infinite bus: hence a hint)
        i_ka = sup.sc_mva / (math.sqrt(3.0) * sup.kv)
        if i_ka > _I_SC_MAX_KA:
            out.append(InputProblem(file, "supply.sc_mva", f"{sup.sc_mva:g} MVA is a fault current of {i_ka:,.0f} kA "
                                    f"at {sup.kv:g} kV; that looks like a value in kVA (give MVA, e.g. "
                                    f"{sup.sc_mva / 1000:g}), unless an infinite bus is meant"))
    for i, bk in enumerate(case.bank):
        small = [k + 1 for k, q in enumerate(bk.steps_kvar) if q < _STAGE_MIN_KVAR]
        if small:
            q0 = bk.steps_kvar[small[0] - 1]
            out.append(InputProblem(file, f"bank[{i}].steps_kvar",
                                    f"stage {small[0]} is {q0:g} kvar; that looks like a value in Mvar "
                                    f"(give kvar, e.g. {q0 * 1000:g})"))
    for i, t in enumerate(case.transformer):
        if t.kva < 10.0:
            out.append(InputProblem(file, f"transformer[{i}].kva", _mva_hint(t.kva, 10.0)))
    for i, hs in enumerate(case.harmonic_source):
        if hs.kva < 1.0:
            out.append(InputProblem(file, f"harmonic_source[{i}].kva", _mva_hint(hs.kva, 1.0)))
    from resonance.standards.spectra import BUILTIN_SPECTRA  # noqa: PLC0415  (pure data; imported late to keep case light)

    for i, hs in enumerate(case.harmonic_source):
        named = BUILTIN_SPECTRA.get(hs.spectrum) if isinstance(hs.spectrum, str) else None
        if named is not None:
            above = [int(h) for h in named.h if h > case.study.h_max]
            if above:
                out.append(InputProblem(file, f"harmonic_source[{i}].spectrum",
                                        f"{hs.spectrum!r} has {len(above)} orders above h_max = "
                                        f"{case.study.h_max:g} ({above[0]} to {above[-1]}); they are left out of "
                                        "the study"))
    if case.network is None and case.supply is not None:
        kv, vprobs = bus_voltages_kv(case)
        for i, bk in enumerate(case.bank):
            feeding = [t for t in case.transformer if t.lv_bus == bk.bus]
            if bk.bus in kv and feeding:
                s_t = sum(t.kva for t in feeding)
                q = _bank_kvar_at_bus(bk, kv[bk.bus])
                if q > s_t:
                    out.append(InputProblem(file, f"bank[{i}].steps_kvar",
                                            f"the whole bank ({q:,.0f} kvar) is {100 * q / s_t:.0f} % of the "
                                            f"{s_t:,.0f} kVA of transformers feeding bus {bk.bus!r}; check the units "
                                            "(a correction bank is normally well below the transformer rating)"))
        sc = sc_kva_estimate(case, kv) if not vprobs else {}
        for i, bk in enumerate(case.bank):
            if bk.bus in sc:
                q = _bank_kvar_at_bus(bk, kv[bk.bus])
                if _RISE_HINT < q / sc[bk.bus] < 1.0:
                    out.append(InputProblem(file, f"bank[{i}].steps_kvar",
                                            f"the whole bank is {100 * q / sc[bk.bus]:.0f} % of the short-circuit "
                                            f"power at bus {bk.bus!r} (about {sc[bk.bus]:,.0f} kVA): switching it "
                                            f"raises the voltage by roughly that much and puts the resonance at "
                                            f"h = {math.sqrt(sc[bk.bus] / q):.2f}"))
        other = 50 if case.frequency_hz == 60 else 60
        volts = sorted(set(kv.values()))

        def typical(v: float, f: int) -> bool:
            return any(abs(v - t) <= 0.01 * t for t in _TYPICAL_KV[f])

        if volts and any(typical(v, other) for v in volts) and not any(typical(v, case.frequency_hz) for v in volts):
            shown = ", ".join(f"{v:g}" for v in volts if typical(v, other))
            out.append(InputProblem(file, "frequency_hz",
                                    f"{case.frequency_hz} Hz, but the bus voltages ({shown} kV) are typical of "
                                    f"{other} Hz systems; check frequency_hz"))
    return tuple(out)
