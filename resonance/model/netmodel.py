"""The one pandapower touch point.

Builds a pandapower net from a :class:`~resonance.inputs.case.Case` (or takes a copy of
a user's net), runs the fundamental load flow and the IEC 60909 short-circuit
calculation, and hands out plain :class:`~resonance.model.network.NetworkArrays`.
No other module imports pandapower.  pandapower writes into the net it is
given (``runpp``, ``to_ppc``, ``calc_sc``): every call here works on a copy.
"""

from __future__ import annotations

import copy
import math
import warnings
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from resonance.inputs.case import Case
from resonance.inputs.case_checks import bus_kv_problems, bus_voltages_kv
from resonance.errors import InputError, InputProblem, ModelError
from resonance.standards.impedance import split_by_x_r
from resonance.model.network import BRANCH_LINE, BRANCH_OTHER, BRANCH_TRAFO, NetworkArrays

__all__ = ["PlantModel", "build_model", "net_to_arrays", "iec60909_sc_mva", "supply_impedance_pu"]


def _pp():
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        import pandapower as pp  # noqa: PLC0415  (lazy: 2-5 s import)
    return pp


@dataclass(frozen=True, eq=False)
class PlantModel:
    """A pandapower net with the lookups the study needs.

    Attributes
    ----------
    net : pandapowerNet
        The net (owned by this object; never the user's own object).
    bus_pp : dict
        Bus name used in the case -> pandapower bus index.
    arrays : NetworkArrays
        Harmonic model of the net at nominal supply strength.
    arrays_weak : NetworkArrays or None
        Same with the weak-supply impedance, when ``sc_mva_min`` is given.
    model_bus : dict
        Bus name used in the case -> index into ``arrays``.
    supply_bus : str
        Name of the supply (external grid) bus.
    sc_mva_supply, x_r_supply : float
        Supply short-circuit power [MVA] and X/R [unitless].
    sc_mva_supply_min, x_r_supply_min : float or None
        Weak-supply scenario [MVA], [unitless].
    """

    net: object
    bus_pp: dict
    arrays: NetworkArrays
    arrays_weak: NetworkArrays | None
    model_bus: dict
    supply_bus: str
    sc_mva_supply: float
    x_r_supply: float
    sc_mva_supply_min: float | None = None
    x_r_supply_min: float | None = None
    notes: tuple = field(default_factory=tuple)


def supply_impedance_pu(sc_mva: float, x_r: float, base_mva: float) -> tuple[float, float]:
    """Thevenin impedance of the supply with c = 1.

    Parameters
    ----------
    sc_mva : float
        Three-phase short-circuit power [MVA].
    x_r : float
        X/R ratio [unitless].
    base_mva : float
        System base [MVA].

    Returns
    -------
    (r_pu, x_pu) : tuple of float
        Resistance and reactance at the fundamental [pu].

    Notes
    -----
    ``|Z| = U_n^2 / S_sc``, i.e. ``base / S_sc`` in per unit, split by X/R
    (:func:`resonance.standards.impedance.split_by_x_r`).

    References
    ----------
    IEC 60909-0:2016, clause 6.2 (network feeder impedance, here with c = 1).
    """
    z = split_by_x_r(base_mva / sc_mva, x_r)
    return z.real, z.imag


#: one empty pandapower net per process: creating its ~70 tables costs about 0.2 s, a copy 0.02 s
_EMPTY_NET: list = []


def _empty_net(pp, name: str, f_hz: float, sn_mva: float):
    """A fresh empty net (a copy of a per-process template, never handed out itself)."""
    if not _EMPTY_NET:
        _EMPTY_NET.append(pp.create_empty_network())
    net = copy.deepcopy(_EMPTY_NET[0])
    net["name"] = name
    net["f_hz"] = f_hz
    net["sn_mva"] = sn_mva
    return net


def _build_from_tables(case: Case):
    pp = _pp()
    kv, _ = bus_voltages_kv(case)
    net = _empty_net(pp, name=case.title, f_hz=float(case.frequency_hz), sn_mva=1.0)
    bus_pp: dict[str, int] = {}
    for name, v in kv.items():
        bus_pp[name] = int(pp.create_bus(net, vn_kv=v, name=name))
    s = case.supply
    assert s is not None
    sc_min = s.sc_mva_min if s.sc_mva_min is not None else s.sc_mva
    xr_min = s.x_r_min if s.x_r_min is not None else s.x_r
    pp.create_ext_grid(net, bus_pp[s.bus], vm_pu=1.0, name="supply", s_sc_max_mva=s.sc_mva,
                       rx_max=1.0 / s.x_r, s_sc_min_mva=sc_min, rx_min=1.0 / xr_min)
    for t in case.transformer:
        vkr = split_by_x_r(t.z_pct, t.x_r).real  # u_Rr [%]
        pp.create_transformer_from_parameters(
            net, bus_pp[t.hv_bus], bus_pp[t.lv_bus], sn_mva=t.kva / 1000.0, vn_hv_kv=t.hv_kv,
            vn_lv_kv=t.lv_kv, vkr_percent=vkr, vk_percent=t.z_pct, pfe_kw=0.0, i0_percent=0.0,
            name=t.name)
    for c in case.cable:
        pp.create_line_from_parameters(
            net, bus_pp[c.from_bus], bus_pp[c.to_bus], length_km=max(c.length_m, 0.0) / 1000.0,
            r_ohm_per_km=c.r_ohm_per_km, x_ohm_per_km=c.x_ohm_per_km, c_nf_per_km=c.c_nf_per_km,
            max_i_ka=10.0, parallel=c.parallel, name=c.name)
    for ld in case.load:
        q = ld.kw * math.tan(math.acos(ld.pf))
        pp.create_load(net, bus_pp[ld.bus], p_mw=ld.kw / 1000.0, q_mvar=q / 1000.0, name=ld.name)
    xr_weak = (s.x_r_min or s.x_r) if s.sc_mva_min is not None else None
    return net, bus_pp, s.bus, s.sc_mva, s.x_r, s.sc_mva_min, xr_weak


def _bus_label(net, idx: int) -> str:
    name = net.bus.at[idx, "name"]
    return str(name) if isinstance(name, str) and name.strip() else f"#{idx}"


#: element tables of a pandapower net that the model reads (directly or through pandapower's
#: converter); each must be a table (DataFrame) when the file has it
_NET_TABLES = ("bus", "ext_grid", "load", "sgen", "gen", "motor", "storage", "shunt", "switch", "line", "trafo",
               "trafo3w", "impedance", "ward", "xward", "dcline", "svc", "ssc", "tcsc", "asymmetric_load",
               "asymmetric_sgen")
#: nominal bus voltages a network file may hold [kV] (the case file's range for supply.kv)
_VN_KV_RANGE = (0.05, 800.0)


def _check_net_tables(net, label: str) -> None:
    """The element tables the model reads are tables, and every bus has a usable nominal voltage.

    Parameters
    ----------
    net : pandapowerNet
        Network as read from the file.
    label : str
        How the network file is named in messages [unitless].

    Raises
    ------
    InputError
        Every element entry that is not a table (named by its key) and every bus whose
        ``vn_kv`` is missing, not finite or outside 0.05 to 800 kV (named by bus name and index).
    """
    import pandas as pd  # noqa: PLC0415  (pandapower's own dependency)

    probs: list[InputProblem] = []
    for key in _NET_TABLES:
        if key in net and not isinstance(net[key], pd.DataFrame):
            probs.append(InputProblem(label, key, f"the {key!r} entry is a {type(net[key]).__name__}, not a table; "
                                      "save the network with pandapower.to_json"))
    for key in ("bus", "ext_grid"):
        if key not in net:
            probs.append(InputProblem(label, key, f"the network has no {key!r} table"))
    if probs:
        raise InputError(probs)
    if "vn_kv" not in net.bus.columns:
        raise InputError.single(label, "bus.vn_kv", "the bus table has no vn_kv column (nominal voltage in kV)")
    lo, hi = _VN_KV_RANGE
    for i, v in zip(net.bus.index, net.bus["vn_kv"]):
        try:
            x = float(v)
        except (TypeError, ValueError):
            x = float("nan")
        if not (math.isfinite(x) and lo < x <= hi):
            try:
                where = f"bus {_bus_label(net, int(i))!r}"
            except (TypeError, ValueError):
                where = f"bus index {i!r}"
            probs.append(InputProblem(label, "bus.vn_kv", f"{where} has vn_kv = {v!r}; every bus needs its nominal "
                                      f"voltage in kV, above {lo:g} and at most {hi:g}"))
            if len(probs) >= 20:
                break
    if probs:
        raise InputError(probs)


def _from_network_file(case: Case, net=None):
    """The case's network (read from its file, or ``net``: a copy owned here) and its lookups."""
    from resonance.inputs.safeload import read_pandapower_json  # noqa: PLC0415

    file = case.source_file
    if net is None:
        assert case.network is not None
        path = Path(case.network.pandapower_json)
        if not path.is_absolute():
            path = Path(case.base_dir) / path
        # a new net on every read (nothing shared), so it is changed here without a copy
        label = f"{file}: network.pandapower_json -> {case.network.pandapower_json}"
        net = read_pandapower_json(path, file_label=label)
    else:
        label = f"{file}: the pandapower net given to run_check"
    _check_net_tables(net, label)
    probs: list[InputProblem] = []
    # bus names: the pandapower name when unique, else '#<index>'; both are accepted
    labels = [_bus_label(net, int(i)) for i in net.bus.index]
    counts: dict[str, int] = {}
    for lab in labels:
        counts[lab] = counts.get(lab, 0) + 1
    bus_pp: dict[str, int] = {}
    for i, lab in zip(net.bus.index, labels):
        bus_pp[f"#{int(i)}"] = int(i)
        if counts[lab] == 1:
            bus_pp[lab] = int(i)
    eg = net.ext_grid[net.ext_grid.in_service.astype(bool)]
    if len(eg) == 0:
        raise InputError.single(file, "network.pandapower_json", "the network has no external grid (supply) in service")
    s = case.supply
    if s is not None:
        if s.bus not in bus_pp:
            raise InputError.single(file, "supply.bus", f"bus {s.bus!r} is not in the network file")
        eb = bus_pp[s.bus]
        if eb not in set(int(b) for b in eg.bus):
            raise InputError.single(file, "supply.bus", f"bus {s.bus!r} has no external grid in the network file")
        sel = eg.index[eg.bus == eb][0]
        net.ext_grid.at[sel, "s_sc_max_mva"] = s.sc_mva
        net.ext_grid.at[sel, "rx_max"] = 1.0 / s.x_r
        net.ext_grid.at[sel, "s_sc_min_mva"] = s.sc_mva_min or s.sc_mva
        net.ext_grid.at[sel, "rx_min"] = 1.0 / (s.x_r_min or s.x_r)
        supply_bus, sc, xr = s.bus, s.sc_mva, s.x_r
        sc_min = s.sc_mva_min
        xr_min = (s.x_r_min or s.x_r) if s.sc_mva_min else None
    else:
        sel = eg.index[0]
        sc = float(net.ext_grid.at[sel, "s_sc_max_mva"]) if "s_sc_max_mva" in net.ext_grid else float("nan")
        rx = float(net.ext_grid.at[sel, "rx_max"]) if "rx_max" in net.ext_grid else float("nan")
        if not (math.isfinite(sc) and sc > 0 and math.isfinite(rx) and rx > 0):
            raise InputError.single(file, "supply", "the network's external grid has no s_sc_max_mva / rx_max; "
                                    "give [supply] bus, kv, sc_mva, x_r")
        supply_bus = _bus_label(net, int(eg.bus.iloc[0]))
        if supply_bus not in bus_pp:
            supply_bus = f"#{int(eg.bus.iloc[0])}"
        sc, xr, sc_min, xr_min = sc, 1.0 / rx, None, None
    for table in ("harmonic_source", "bank", "load"):
        for i, item in enumerate(getattr(case, table)):
            if item.bus not in bus_pp:
                probs.append(InputProblem(file, f"{table}[{i}].bus", f"bus {item.bus!r} is not in the network file "
                                          "(name a bus by its unique name or as '#<index>')"))
    if case.study.pcc_bus and case.study.pcc_bus not in bus_pp:
        probs.append(InputProblem(file, "study.pcc_bus", f"bus {case.study.pcc_bus!r} is not in the network file"))
    if case.transformer or case.cable:
        probs.append(InputProblem(file, "network", "a case with a network file takes its transformers and cables "
                                  "from the file; remove [[transformer]] and [[cable]]"))
    if probs:
        raise InputError(probs)
    # the voltage checks a table-built case gets at validation, now that the bus voltages are known
    pcc = case.study.pcc_bus or supply_bus
    kv = {name: float(net.bus.at[bus_pp[name], "vn_kv"])
          for name in {b.bus for b in case.bank} | {pcc} if name in bus_pp}
    probs = bus_kv_problems(case, kv, pcc_bus=pcc)
    if probs:
        raise InputError(probs)
    pp = _pp()
    for ld in case.load:
        q = ld.kw * math.tan(math.acos(ld.pf))
        pp.create_load(net, bus_pp[ld.bus], p_mw=ld.kw / 1000.0, q_mvar=q / 1000.0, name=ld.name)
    return net, bus_pp, supply_bus, sc, xr, sc_min, xr_min


def _grid_impedances(net, pp2m: np.ndarray, sc_by_grid: dict | None, require_grid_data: bool,
                     base: float) -> tuple[list, list, list]:
    """Model bus, r [pu] and x [pu] of each in-service external grid (see :func:`net_to_arrays`)."""
    g_bus, g_r, g_x = [], [], []
    for gi, r in net.ext_grid.iterrows():
        if not bool(r.in_service):
            continue
        m = pp2m[int(r.bus)]
        if m < 0:
            continue
        if sc_by_grid and gi in sc_by_grid:
            sc, xr = sc_by_grid[gi]
        else:
            sc = float(r.get("s_sc_max_mva", float("nan")))
            rx = float(r.get("rx_max", float("nan")))
            xr = 1.0 / rx if rx and np.isfinite(rx) and rx > 0 else float("nan")
        if not (np.isfinite(sc) and sc > 0 and np.isfinite(xr) and xr > 0):
            if not require_grid_data:
                continue
            raise ModelError(f"external grid {gi} has no short-circuit data (s_sc_max_mva, rx_max)")
        rg, xg = supply_impedance_pu(sc, xr, base)
        g_bus.append(m)
        g_r.append(rg)
        g_x.append(xg)
    return g_bus, g_r, g_x


def net_to_arrays(net, sc_by_grid: dict | None = None, require_grid_data: bool = True,
                  copy_net: bool = True) -> tuple[NetworkArrays, np.ndarray]:
    """Convert a pandapower net into :class:`NetworkArrays` (on a copy of the net).

    Long on purpose: one pass over pandapower's branch, bus and load tables of its internal
    case (``to_ppc``), each table a short block.

    Parameters
    ----------
    net : pandapowerNet
        Network; not modified.
    sc_by_grid : dict, optional
        ext_grid index -> (sc_mva [MVA], x_r [unitless]) overriding the table.
    require_grid_data : bool
        Raise when an external grid lacks short-circuit data (else leave it out).
    copy_net : bool
        Convert a copy (default).  False converts ``net`` itself, for a net the
        caller owns: pandapower's conversion then leaves its lookups on ``net``
        (element tables are not changed).

    Returns
    -------
    NetworkArrays
        Harmonic model at the fundamental [pu].
    ndarray
        pandapower bus index -> model bus index (-1 for buses not in the model).

    Notes
    -----
    Uses pandapower's ``to_ppc`` with the pi transformer model and no voltage
    angles, then takes loads, shunts and external grids from pandapower's
    element tables (the converted bus columns sum elements that scale
    differently with frequency).

    References
    ----------
    pandapower documentation, "Converter: to_ppc"; Zimmerman et al., MATPOWER
    User's Manual, sec. 3 (case format).
    """
    from pandapower.converter.pypower import to_ppc  # noqa: PLC0415
    from pandapower.pypower import idx_brch as B  # noqa: PLC0415
    from pandapower.pypower import idx_bus as U  # noqa: PLC0415

    work = copy.deepcopy(net) if copy_net else net
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        ppc = to_ppc(work, calculate_voltage_angles=False, trafo_model="pi", init="flat",
                     check_connectivity=True)
    lookup = np.asarray(work._pd2ppc_lookups["bus"])
    base = float(ppc["baseMVA"])
    bus = ppc["bus"]
    branch = ppc["branch"]
    keep = bus[:, U.BUS_TYPE] != U.NONE
    new = -np.ones(bus.shape[0], int)
    new[keep] = np.arange(int(keep.sum()))
    bus_kv = bus[keep, U.BASE_KV].astype(float)
    # pandapower bus -> model bus
    pp2m = -np.ones(int(max(net.bus.index.max(), 0)) + 1, int)
    for i in net.bus.index:
        i = int(i)
        if i < lookup.size and lookup[i] >= 0 and lookup[i] < new.size:
            pp2m[i] = new[lookup[i]]
    names = [""] * int(keep.sum())
    for i in net.bus.index:
        m = pp2m[int(i)]
        if m >= 0 and not names[m]:
            names[m] = _bus_label(net, int(i))
    names = [n or f"aux{k}" for k, n in enumerate(names)]
    # branches in service between kept buses
    f = branch[:, B.F_BUS].real.astype(int)
    t = branch[:, B.T_BUS].real.astype(int)
    ok = (branch[:, B.BR_STATUS].real > 0) & keep[f] & keep[t]
    kind = np.full(branch.shape[0], BRANCH_OTHER)
    lk = work._pd2ppc_lookups["branch"]
    if "line" in lk:
        kind[lk["line"][0]:lk["line"][1]] = BRANCH_LINE
    for key in ("trafo", "trafo3w"):
        if key in lk:
            kind[lk[key][0]:lk[key][1]] = BRANCH_TRAFO
    tap = branch[:, B.TAP].real.copy()
    tap[tap == 0] = 1.0
    def col(c: int) -> np.ndarray:
        return branch[:, c].real.astype(float) if branch.shape[1] > c else np.zeros(branch.shape[0])

    asym = np.abs(np.stack([col(B.BR_R_ASYM), col(B.BR_X_ASYM), col(B.BR_G_ASYM), col(B.BR_B_ASYM)])).max(axis=0)
    if np.any(asym[ok] > 0):
        raise ModelError("the network holds branches with asymmetric impedance; the harmonic model needs symmetric branches")
    sel = np.nonzero(ok)[0]
    # pandapower 3.x keeps the branch shunt conductance (transformer iron losses) apart
    br_g = np.asarray(ppc["branch_g"], float).ravel() if "branch_g" in ppc else col(B.BR_G)
    if br_g.size != branch.shape[0]:
        br_g = col(B.BR_G)
    # shunts from the shunt table (capacitors and reactors kept apart)
    sh_bus, sh_g, sh_b = [], [], []
    if len(net.shunt):
        for _, r in net.shunt.iterrows():
            if not bool(r.in_service):
                continue
            m = pp2m[int(r.bus)]
            if m < 0:
                continue
            vn = float(r.vn_kv) if np.isfinite(r.vn_kv) else bus_kv[m]
            scale = float(r.step) * (bus_kv[m] / vn) ** 2 / base
            sh_bus.append(m)
            sh_g.append(float(r.p_mw) * scale)
            sh_b.append(-float(r.q_mvar) * scale)
    # remaining bus shunts (wards, etc.): converted GS/BS less the shunt table
    gs = bus[keep, U.GS].real / base
    bs = bus[keep, U.BS].real / base
    if sh_bus:
        np.subtract.at(gs, np.array(sh_bus), np.array(sh_g))
        np.subtract.at(bs, np.array(sh_bus), np.array(sh_b))
    rest = np.nonzero((np.abs(gs) > 1e-12) | (np.abs(bs) > 1e-12))[0]
    sh_bus += list(rest)
    sh_g += list(gs[rest])
    sh_b += list(bs[rest])
    # loads at nominal voltage (constant impedance), scaled
    ld_bus, ld_p, ld_q = [], [], []
    for _, r in net.load.iterrows():
        if not bool(r.in_service):
            continue
        m = pp2m[int(r.bus)]
        if m < 0:
            continue
        sc = float(r.scaling) if "scaling" in r and np.isfinite(r.scaling) else 1.0
        ld_bus.append(m)
        ld_p.append(float(r.p_mw) * sc / base)
        ld_q.append(float(r.q_mvar) * sc / base)
    g_bus, g_r, g_x = _grid_impedances(net, pp2m, sc_by_grid, require_grid_data, base)
    arr = NetworkArrays(
        f_hz=float(net.f_hz), base_mva=base, bus_names=tuple(names), bus_kv=bus_kv,
        br_from=new[f[sel]], br_to=new[t[sel]],
        br_r_pu=branch[sel, B.BR_R].real.astype(float), br_x_pu=branch[sel, B.BR_X].real.astype(float),
        br_g_pu=br_g[sel], br_b_pu=col(B.BR_B)[sel],
        br_tap=tap[sel].astype(complex), br_kind=kind[sel],
        sh_bus=np.array(sh_bus, int), sh_g_pu=np.array(sh_g, float), sh_b_pu=np.array(sh_b, float),
        load_bus=np.array(ld_bus, int), load_p_pu=np.array(ld_p, float), load_q_pu=np.array(ld_q, float),
        grid_bus=np.array(g_bus, int), grid_r_pu=np.array(g_r, float), grid_x_pu=np.array(g_x, float),
    )
    return arr, pp2m


def build_model(case: Case, net=None) -> PlantModel:
    """Build the plant model of a case.

    Parameters
    ----------
    case : Case
        Validated case.
    net : pandapowerNet, optional
        A live pandapower net standing for the case's ``[network]`` file (the Python API);
        it is deep-copied and never modified.  The case's buses, banks and sources name its
        buses as a network file's would.

    Returns
    -------
    PlantModel
        The pandapower net, lookups and harmonic arrays (nominal and weak supply).

    Raises
    ------
    InputError
        A network file that cannot be used, or buses the case names that it lacks.
    """
    if net is not None:
        net, bus_pp, supply_bus, sc, xr, sc_min, xr_min = _from_network_file(case, copy.deepcopy(net))
    elif case.network is not None:
        net, bus_pp, supply_bus, sc, xr, sc_min, xr_min = _from_network_file(case)
    else:
        net, bus_pp, supply_bus, sc, xr, sc_min, xr_min = _build_from_tables(case)
    grid_idx = [int(i) for i in net.ext_grid.index if bool(net.ext_grid.at[i, "in_service"])]
    sup_pp = bus_pp[supply_bus]
    overrides = {gi: (sc, xr) for gi in grid_idx if int(net.ext_grid.at[gi, "bus"]) == sup_pp}
    try:
        # the net was made (or copied) for this model: converted in place, no third copy
        arrays, pp2m = net_to_arrays(net, overrides, copy_net=False)
    except ModelError as e:
        raise InputError.single(case.source_file, "network", str(e)) from None
    arrays_weak = None
    if sc_min is not None:
        weak = dict(overrides)
        for gi in weak:
            weak[gi] = (sc_min, xr_min or xr)
        # same network, other supply impedance: only the grid arrays change
        g_bus, g_r, g_x = _grid_impedances(net, pp2m, weak, True, arrays.base_mva)
        if list(g_bus) == list(arrays.grid_bus):
            arrays_weak = arrays.with_grid(np.array(g_r, float), np.array(g_x, float))
        else:  # pragma: no cover - the same filters pick the same grids
            arrays_weak, _ = net_to_arrays(net, weak)
    model_bus = {}
    for name, i in bus_pp.items():
        m = int(pp2m[i]) if i < pp2m.size else -1
        if m >= 0:
            model_bus[name] = m
    probs = []
    for table in ("harmonic_source", "bank"):
        for i, item in enumerate(getattr(case, table)):
            if item.bus in bus_pp and item.bus not in model_bus:
                probs.append(InputProblem(case.source_file, f"{table}[{i}].bus",
                                          f"bus {item.bus!r} is out of service or not connected to the supply"))
    if probs:
        raise InputError(probs)
    return PlantModel(net=net, bus_pp=bus_pp, arrays=arrays, arrays_weak=arrays_weak, model_bus=model_bus,
                      supply_bus=supply_bus, sc_mva_supply=sc, x_r_supply=xr,
                      sc_mva_supply_min=sc_min, x_r_supply_min=xr_min)


def iec60909_sc_mva(model: PlantModel, buses: list[str], case: str = "max") -> dict[str, float]:
    """Initial symmetrical short-circuit power per IEC 60909 at the named buses.

    Parameters
    ----------
    model : PlantModel
        Plant model (its net is copied).
    buses : list of str
        Bus names.
    case : str
        "max" or "min" (voltage factor c_max or c_min).

    Returns
    -------
    dict
        Bus name -> ``S_k'' = sqrt(3) U_n I_k''`` [MVA], including the voltage
        factor c and the transformer correction K_T.

    References
    ----------
    IEC 60909-0:2016, clauses 4.3 (eq. 29) and 6.3.3 (K_T); computed by
    pandapower's ``shortcircuit.calc_sc``.
    """
    pp = _pp()
    import pandapower.shortcircuit as sc  # noqa: PLC0415

    net = copy.deepcopy(model.net)
    idx = sorted({model.bus_pp[b] for b in buses})
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        sc.calc_sc(net, bus=idx, case=case, inverse_y=False, branch_results=False)
    _ = pp
    out = {}
    for b in buses:
        i = model.bus_pp[b]
        ik = float(net.res_bus_sc.at[i, "ikss_ka"])
        out[b] = math.sqrt(3.0) * float(net.bus.at[i, "vn_kv"]) * ik
    return out
