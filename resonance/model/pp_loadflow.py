"""Fundamental load flows of a plant with its banks at chosen outputs (pandapower or arrays).

Part of the model room, the pandapower touch point: :class:`LoadFlow` copies the net once,
puts the supply behind its Thevenin impedance and solves with every bank a constant-impedance
shunt; :func:`bank_voltages` is the memoised entry the study uses.  Never modifies the
plant's net.
"""

from __future__ import annotations

import copy
import warnings

import numpy as np

from resonance.errors import ModelError
from resonance.memo import remember
from resonance.model.netmodel import PlantModel, _pp, supply_impedance_pu

__all__ = ["LoadFlow", "load_flow_session", "bank_voltages", "load_flow_vm_pu"]

def bank_voltages(model: PlantModel, bank_buses: dict, q_kvar: dict, weak: bool = False, v_source_pu: float = 1.0,
                  load_scale: float = 1.0) -> np.ndarray:
    """Bus voltages [pu] with banks at the given outputs [kvar] (see :class:`LoadFlow`).

    ``v_source_pu`` is the supply voltage [pu] and ``load_scale`` the linear loads as a fraction
    of the case's [unitless] (the operating envelope, :mod:`resonance.assessment.envelope`).
    Memoised in the running check's memo (:mod:`resonance.memo`) on the exact outputs: every
    load flow runs at the outputs asked for.
    """
    key = (model, weak, float(v_source_pu), float(load_scale), tuple(sorted(bank_buses.items())),
           tuple(sorted((k, float(v)) for k, v in q_kvar.items())))
    vm = remember("bank_voltages", key,
                  lambda: load_flow_session(model, bank_buses, weak, v_source_pu, load_scale).vm_pu(
                      {k: float(v) for k, v in q_kvar.items()}))
    return vm.copy()


def load_flow_session(model: PlantModel, bank_buses: dict, weak: bool = False, v_source_pu: float = 1.0,
                      load_scale: float = 1.0) -> "LoadFlow":
    """The :class:`LoadFlow` of a plant with the given banks, in one supply scenario.

    The weak-supply session is derived from the nominal one by changing the supply
    impedance in the bus admittance matrix (:meth:`LoadFlow.with_supply`) when the
    nominal session runs on arrays; otherwise it is a pandapower session of its own.
    Memoised in the running check's memo (:mod:`resonance.memo`).

    Parameters
    ----------
    model : PlantModel
        Plant model.
    bank_buses : dict
        Bank name -> bus name.
    weak : bool
        Weak-supply scenario (``sc_mva_supply_min``).

    Returns
    -------
    LoadFlow
    """
    v, ls = float(v_source_pu), float(load_scale)

    def make() -> "LoadFlow":
        if (v, ls) != (1.0, 1.0):  # the envelope: derived from the session at 1.0 pu and full load
            base = load_flow_session(model, bank_buses, weak, 1.0, 1.0)
            lf = base.with_envelope(v, ls) if base.mode == "arrays" else None
            return lf if lf is not None else LoadFlow(model, bank_buses, weak=weak, v_source_pu=v, load_scale=ls)
        if weak and model.sc_mva_supply_min:
            nominal = load_flow_session(model, bank_buses, False, v, ls)
            xr = model.x_r_supply_min or model.x_r_supply
            lf = nominal.with_supply(model.sc_mva_supply_min, xr) if nominal.mode == "arrays" else None
            return lf if lf is not None else LoadFlow(model, bank_buses, weak=True, v_source_pu=v, load_scale=ls)
        return LoadFlow(model, bank_buses, weak=weak, v_source_pu=v, load_scale=ls)

    return remember("load_flow_session", (model, weak, v, ls, tuple(sorted(bank_buses.items()))), make)


class LoadFlow:
    """Fundamental load flows of one plant with its banks at chosen outputs.

    The net is copied once, the supply is put behind its Thevenin impedance
    and each bank becomes a constant-impedance shunt whose output is changed
    between runs; later runs start from the previous solution.

    pandapower solves the case once with every bank at zero.  Its bus
    admittance matrix, injections and bus types then go to
    :func:`resonance.model.loadflow.newton_raphson`, which must reproduce
    pandapower's voltages to 1e-7 pu before it is used; each bank step then
    only adds its susceptance to one diagonal entry (``mode == "arrays"``).
    Where that check fails, every step is a pandapower ``runpp``
    (``mode == "pandapower"``).

    Parameters
    ----------
    model : PlantModel
        Plant model (its net is copied, never modified).
    bank_buses : dict
        Bank name -> bus name.
    weak : bool
        Use the weak-supply short-circuit power (``sc_mva_supply_min``).

    References
    ----------
    pandapower documentation, ``runpp`` (Newton-Raphson power flow); Tinney and
    Hart (1967), see :mod:`resonance.model.loadflow`.
    """

    def __init__(self, model: PlantModel, bank_buses: dict, weak: bool = False, v_source_pu: float = 1.0,
                 load_scale: float = 1.0):
        self._pp = _pp()
        self.model = model
        self.net = copy.deepcopy(model.net)
        if load_scale != 1.0 and len(self.net.load):  # the envelope's light load (pandapower's own scaling)
            self.net.load["scaling"] = self.net.load["scaling"].astype(float) * float(load_scale)
        sc = model.sc_mva_supply_min if weak and model.sc_mva_supply_min else model.sc_mva_supply
        xr = model.x_r_supply_min if weak and model.x_r_supply_min else model.x_r_supply
        self._source = _supply_behind_impedance(self._pp, self.net, model, sc, xr)
        if v_source_pu != 1.0:  # the envelope's supply voltage, at the source EMF behind its impedance
            self.net.ext_grid["vm_pu"] = self.net.ext_grid["vm_pu"].astype(float) * float(v_source_pu)
        self.shunt = {}
        for name, bus in bank_buses.items():
            b = model.bus_pp[bus]
            self.shunt[name] = int(self._pp.create_shunt(self.net, b, q_mvar=0.0, p_mw=0.0,
                                                         vn_kv=float(self.net.bus.at[b, "vn_kv"])))
        self._solved = False
        #: how the steps are solved: "arrays" (resonance.model.loadflow on pandapower's own Ybus) or
        #: "pandapower" (runpp per step, when the arrays path could not be set up or verified)
        self.mode = "pandapower"
        self._pf = None
        self._v_last = None
        try:
            self._runpp()
        except Exception:  # noqa: BLE001  (pandapower's own errors; the per-step path reports them)
            return
        self._setup_arrays()

    def with_supply(self, sc_mva: float, x_r: float) -> "LoadFlow | None":
        """The same session with another supply short-circuit power (arrays mode only).

        Parameters
        ----------
        sc_mva : float
            Supply short-circuit power [MVA].
        x_r : float
            Supply X/R [unitless].

        Returns
        -------
        LoadFlow or None
            A new session sharing this one's arrays, or None where this session
            is not on arrays or has no supply impedance to change.

        Notes
        -----
        The supply impedance is a series branch between the source-EMF bus ``a``
        and the supply bus ``s``; changing its admittance from ``y`` to ``y'``
        adds ``y' - y`` to ``Y[a, a]`` and ``Y[s, s]`` and subtracts it from
        ``Y[a, s]`` and ``Y[s, a]`` (Grainger and Stevenson, sec. 7.4).
        """
        if self.mode != "arrays" or not self._source:
            return None
        import scipy.sparse as sp  # noqa: PLC0415

        from resonance.model.loadflow import PowerFlowCase  # noqa: PLC0415

        lookup = np.asarray(self.net._pd2ppc_lookups["bus"])
        rows, cols, vals = [], [], []
        for aux, sup, r_old, x_old in self._source:
            a, b = int(lookup[aux]), int(lookup[sup])
            r_new, x_new = supply_impedance_pu(sc_mva, x_r, float(self.net.sn_mva))
            dy = 1.0 / complex(r_new, x_new) - 1.0 / complex(r_old, x_old)
            rows += [a, b, a, b]
            cols += [a, b, b, a]
            vals += [dy, dy, -dy, -dy]
        n = self._pf.n_bus
        dyb = sp.csr_matrix((np.array(vals, complex), (rows, cols)), shape=(n, n))
        new = copy.copy(self)
        new._pf = PowerFlowCase(ybus=(self._pf.ybus + dyb).tocsr(), sbus=self._pf.sbus, v0=self._pf.v0,
                                ref=self._pf.ref, pv=self._pf.pv, pq=self._pf.pq)
        new._source = [(aux, sup, *supply_impedance_pu(sc_mva, x_r, float(self.net.sn_mva)))
                       for aux, sup, _, _ in self._source]
        new._v_last = None if self._v_last is None else self._v_last.copy()
        return new

    def with_envelope(self, v_source_pu: float, load_scale: float) -> "LoadFlow | None":
        """The same session with the supply EMF at ``v_source_pu`` [pu] and the linear loads
        scaled by ``load_scale`` [unitless] (arrays mode only; None otherwise).

        Notes
        -----
        Loads are constant power in this load flow (``voltage_depend_loads=False``), so scaling
        them scales their part ``-(P_D + j Q_D) / S_base`` of the bus injections; the EMF is the
        voltage magnitude of the reference bus (the source behind the supply impedance).
        """
        if self.mode != "arrays":
            return None
        from resonance.model.loadflow import PowerFlowCase  # noqa: PLC0415

        try:
            bus = np.asarray(self.net._ppc["internal"]["bus"], float)
            s_load = (bus[:, 2] + 1j * bus[:, 3]) / self._base_mva  # PD, QD columns of the case [MW, Mvar]
        except (AttributeError, KeyError, TypeError, ValueError, IndexError):
            return None
        if s_load.size != self._pf.n_bus:
            return None
        v0 = self._pf.v0.copy()
        v0[self._pf.ref] = v0[self._pf.ref] * float(v_source_pu)
        new = copy.copy(self)
        new._pf = PowerFlowCase(ybus=self._pf.ybus, sbus=self._pf.sbus + (1.0 - float(load_scale)) * s_load, v0=v0,
                                ref=self._pf.ref, pv=self._pf.pv, pq=self._pf.pq)
        new._v_last = None
        return new

    def _runpp(self) -> None:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            self._pp.runpp(self.net, calculate_voltage_angles=False, trafo_model="pi", numba=False,
                           init="results" if self._solved else "flat", voltage_depend_loads=False)
        self._solved = True

    def _setup_arrays(self) -> None:
        """Take pandapower's bus admittance matrix and injections (banks at zero) and verify
        that :func:`resonance.model.loadflow.newton_raphson` reproduces pandapower's solution."""
        from resonance.model.loadflow import PowerFlowCase, newton_raphson  # noqa: PLC0415

        try:
            internal = self.net._ppc["internal"]
            lookup = np.asarray(self.net._pd2ppc_lookups["bus"])
            ybus = internal["Ybus"].tocsr()
            v_pp = np.asarray(internal["V"], complex).copy()
            ref = np.asarray(internal["ref"], int)
            pv = np.asarray(internal["pv"], int)
            pq = np.asarray(internal["pq"], int)
            sbus = np.asarray(internal["Sbus"], complex).copy()
        except (AttributeError, KeyError, TypeError, ValueError):
            return
        n = v_pp.size
        if ybus.shape != (n, n) or sbus.size != n or ref.size == 0:
            return
        v0 = np.full(n, np.exp(1j * np.angle(v_pp[ref[0]])), complex)
        fixed = np.concatenate([ref, pv])
        v0[fixed] = np.abs(v_pp[fixed]) * np.exp(1j * np.angle(v_pp[ref[0]]))
        v0[ref] = v_pp[ref]
        pf = PowerFlowCase(ybus=ybus, sbus=sbus, v0=v0, ref=ref, pv=pv, pq=pq)
        v, ok, _ = newton_raphson(pf)
        # trust the arrays path only where it reproduces pandapower's own load flow
        if not ok or np.max(np.abs(v - v_pp)) > 1e-7:
            return
        bank_idx = {}
        for name in self.shunt:
            b = int(self.net.shunt.at[self.shunt[name], "bus"])
            k = int(lookup[b]) if b < lookup.size else -1
            if not 0 <= k < n:
                return
            bank_idx[name] = k
        model_idx = {}
        for name, m in self.model.model_bus.items():
            b = self.model.bus_pp[name]
            k = int(lookup[b]) if b < lookup.size else -1
            if not 0 <= k < n:
                return
            model_idx[m] = k
        self._pf = pf
        self._bank_idx = bank_idx
        self._model_idx = model_idx
        self._base_mva = float(internal["baseMVA"])
        self._v_last = v
        self.mode = "arrays"

    def vm_pu(self, q_kvar: dict) -> np.ndarray:
        """Bus voltages with the banks at the given outputs.

        Parameters
        ----------
        q_kvar : dict
            Bank name -> reactive power at the bus nominal voltage [kvar]
            (constant impedance; banks not named are off).

        Returns
        -------
        ndarray, shape (n_model_bus,)
            Voltage magnitude per model bus [pu].

        Raises
        ------
        ModelError
            The load flow did not converge.
        """
        if self.mode == "arrays":
            vm = self._vm_arrays(q_kvar)
        else:
            vm = self._vm_pandapower(q_kvar)
        # a solution far from nominal is a spurious Newton root (seen near 1e-9 pu when a bank
        # reaches 40-100 % of the short-circuit power at its bus), not an operating point
        if not np.all((vm > 0.5) & (vm < 2.5)):
            self._solved = False
            self._v_last = None
            raise ModelError(f"fundamental load flow found no plausible operating point "
                             f"(bus voltages {vm.min():.3g} to {vm.max():.3g} pu)")
        return vm

    def _vm_arrays(self, q_kvar: dict) -> np.ndarray:
        from resonance.model.loadflow import solve_with_shunts  # noqa: PLC0415

        names = list(self._bank_idx)
        bus = np.array([self._bank_idx[k] for k in names], int)
        b_pu = np.array([float(q_kvar.get(k, 0.0)) / 1000.0 / self._base_mva for k in names])
        v, ok, _ = solve_with_shunts(self._pf, bus, b_pu, v_start=self._v_last)
        if not ok and self._v_last is not None:
            v, ok, _ = solve_with_shunts(self._pf, bus, b_pu)  # again from the flat start
        if not ok:
            self._v_last = None
            raise ModelError("fundamental load flow did not converge (Newton-Raphson on the bus admittance matrix)")
        self._v_last = v
        vm = np.ones(self.model.arrays.n_bus)
        for m, k in self._model_idx.items():
            vm[m] = abs(v[k])
        return vm

    def _vm_pandapower(self, q_kvar: dict) -> np.ndarray:
        for name, idx in self.shunt.items():
            self.net.shunt.at[idx, "q_mvar"] = -float(q_kvar.get(name, 0.0)) / 1000.0
        try:
            self._runpp()
        except Exception as e:  # pandapower raises its own LoadflowNotConverged and others
            self._solved = False
            raise ModelError(f"fundamental load flow did not converge ({type(e).__name__})") from None
        vm = np.ones(self.model.arrays.n_bus)
        for name, m in self.model.model_bus.items():
            vm[m] = float(self.net.res_bus.at[self.model.bus_pp[name], "vm_pu"])
        return vm

def load_flow_vm_pu(model: PlantModel, shunts: list[tuple[str, float]]) -> np.ndarray:
    """One fundamental load flow with capacitive shunts in service (see :class:`LoadFlow`).

    Parameters
    ----------
    model : PlantModel
        Plant model (its net is copied, never modified).
    shunts : list of (bus name, q_kvar)
        Reactive power of each capacitor at the bus's nominal voltage [kvar].

    Returns
    -------
    ndarray, shape (n_model_bus,)
        Bus voltage magnitude per model bus [pu].
    """
    lf = LoadFlow(model, {f"s{i}": bus for i, (bus, _) in enumerate(shunts)})
    return lf.vm_pu({f"s{i}": q for i, (_, q) in enumerate(shunts)})

def _supply_behind_impedance(pp, net, model: PlantModel, sc_mva: float | None = None,
                             x_r: float | None = None) -> list:
    """Put each external grid behind its Thevenin impedance (load-flow copy only).

    Returns the supply-bus source impedances as (source-EMF bus, supply bus, r [pu], x [pu]).

    pandapower's external grid is an ideal source in the load flow; the
    voltage rise of a bank step depends on the supply impedance, so the
    source EMF (``vm_pu``) is moved to an auxiliary bus joined to the supply
    bus through the physical (c = 1) short-circuit impedance.
    """
    sup = model.bus_pp[model.supply_bus]
    source = []
    for gi in list(net.ext_grid.index):
        if not bool(net.ext_grid.at[gi, "in_service"]):
            continue
        b = int(net.ext_grid.at[gi, "bus"])
        if b == sup:
            sc = sc_mva if sc_mva else model.sc_mva_supply
            xr = x_r if x_r else model.x_r_supply
        else:
            sc = float(net.ext_grid.at[gi, "s_sc_max_mva"]) if "s_sc_max_mva" in net.ext_grid else float("nan")
            rx = float(net.ext_grid.at[gi, "rx_max"]) if "rx_max" in net.ext_grid else float("nan")
            xr = 1.0 / rx if np.isfinite(rx) and rx > 0 else float("nan")
        if not (np.isfinite(sc) and sc > 0 and np.isfinite(xr) and xr > 0):
            continue
        r_pu, x_pu = supply_impedance_pu(sc, xr, float(net.sn_mva))
        aux = pp.create_bus(net, vn_kv=float(net.bus.at[b, "vn_kv"]), name=f"__source_emf_{gi}")
        pp.create_impedance(net, aux, b, rft_pu=r_pu, xft_pu=x_pu, sn_mva=float(net.sn_mva))
        net.ext_grid.at[gi, "bus"] = aux
        if b == sup:
            source.append((int(aux), b, r_pu, x_pu))
    return source
