"""Harmonic voltage levels of the IEC 61000 series: in-plant compatibility levels (IEC 61000-2-4
classes 1, 2 and 3) and indicative planning levels at an MV or HV connection (IEC/TR 61000-3-6).

Data with their source marker, no computation beyond the lookup.  The values are those of
/work/shared/REFERENCES.md "In-plant and planning levels of harmonic voltage", which marks them
**from memory** (verify against the standard's tables before relying on them); they are kept
here as data so a verified table replaces them in one place.

References
----------
IEC 61000-2-4:2002, Compatibility levels in industrial plants for low-frequency conducted
disturbances, tables 2 to 4 (odd non-multiple-of-3, odd multiple-of-3 and even orders) and THD.
IEC/TR 61000-3-6:2008, Assessment of emission limits for the connection of distorting
installations to MV, HV and EHV power systems, table 2 (indicative planning levels).
"""

from __future__ import annotations

from dataclasses import dataclass

from resonance.errors import InputError

__all__ = ["IN_PLANT_SETS", "PLANNING_SETS", "InPlantLimits", "in_plant_limits", "planning_levels"]

_SOURCE = ("IEC 61000-2-4:2002 compatibility levels, class {c} (from memory, REFERENCES.md; verify against "
           "the standard)")

#: class -> (THD [%], {order: individual level [% of nominal]}); orders not listed carry no
#: individual level here (THD only)
_LEVELS = {
    1: (5.0, {2: 2.0, 3: 3.0, 4: 1.0, 5: 3.0, 7: 3.0, 9: 1.5, 11: 3.0, 13: 3.0, 17: 2.0, 19: 1.5, 23: 1.5,
              25: 1.5}),
    2: (8.0, {2: 2.0, 3: 5.0, 4: 1.0, 5: 6.0, 7: 5.0, 9: 1.5, 11: 3.5, 13: 3.0, 17: 2.0, 19: 1.5, 23: 1.5,
              25: 1.5}),
    3: (10.0, {2: 3.0, 3: 6.0, 4: 1.5, 5: 8.0, 7: 7.0, 9: 2.5, 11: 5.0, 13: 4.5, 17: 4.0, 19: 4.0, 23: 3.5,
               25: 3.5}),
}

#: the names a case uses (``[study] in_plant_limits``)
IN_PLANT_SETS = {"iec61000-2-4-class1": 1, "iec61000-2-4-class2": 2, "iec61000-2-4-class3": 3}


@dataclass(frozen=True)
class InPlantLimits:
    """Compatibility levels at a bus inside the plant.

    Attributes
    ----------
    name : str
        The set's name as the case gives it [unitless].
    thd_pct : float
        THD level [% of nominal voltage].
    individual_pct : dict
        Order -> level [% of nominal voltage]; an order not listed has none here.
    source : str
        The standard, class and marker [unitless].
    """

    name: str
    thd_pct: float
    individual_pct: dict
    source: str


def in_plant_limits(name: str, *, file: str = "<input>") -> InPlantLimits:
    """The in-plant compatibility levels of a named class.

    Parameters
    ----------
    name : str
        ``"iec61000-2-4-class1"``, ``"-class2"`` or ``"-class3"`` [unitless].
    file : str
        Input file, for the error message [unitless].

    Returns
    -------
    InPlantLimits

    Raises
    ------
    InputError
        An unknown name (the case schema refuses it first).

    References
    ----------
    IEC 61000-2-4:2002, tables 2 to 4 (values from memory, see the module docstring).
    """
    c = IN_PLANT_SETS.get(name)
    if c is None:
        raise InputError.single(file, "study.in_plant_limits", f"unknown set {name!r}; choose one of "
                                + ", ".join(repr(k) for k in IN_PLANT_SETS))
    thd, ind = _LEVELS[c]
    return InPlantLimits(name=name, thd_pct=thd, individual_pct=dict(ind), source=_SOURCE.format(c=c))


_PLANNING_SOURCE = ("IEC/TR 61000-3-6:2008 indicative planning levels, {v} (from memory, REFERENCES.md; verify "
                    "against the report and the utility's own levels)")

#: connection -> (THD [%], {order: planning level [% of nominal]}); REFERENCES.md gives 0.7-1.0 %
#: for HV orders 19-25: 1.0 % is taken for the 19th and 0.7 % for the 23rd and 25th (from memory)
_PLANNING = {
    "MV": (6.5, {2: 1.8, 3: 4.0, 4: 1.0, 5: 5.0, 7: 4.0, 9: 1.2, 11: 3.0, 13: 2.5, 17: 1.6, 19: 1.2, 23: 1.2,
                 25: 1.2}),
    "HV-EHV": (3.0, {2: 1.4, 3: 2.0, 4: 0.8, 5: 2.0, 7: 2.0, 9: 1.0, 11: 1.5, 13: 1.5, 17: 1.2, 19: 1.0, 23: 0.7,
                     25: 0.7}),
}

#: the names a case uses (``[study] pcc_voltage_limits``, beside the default ``"ieee519"``)
PLANNING_SETS = {"iec61000-3-6-mv": "MV", "iec61000-3-6-hv": "HV-EHV"}


def planning_levels(name: str, *, file: str = "<input>") -> InPlantLimits:
    """The indicative planning levels of harmonic voltage at an MV or HV connection (the PCC).

    Parameters
    ----------
    name : str
        ``"iec61000-3-6-mv"`` or ``"iec61000-3-6-hv"`` [unitless].
    file : str
        Input file, for the error message [unitless].

    Returns
    -------
    InPlantLimits
        THD and per-order levels [% of nominal voltage] (same shape as the in-plant levels).

    References
    ----------
    IEC/TR 61000-3-6:2008, table 2 (values from memory, see the module docstring).
    """
    v = PLANNING_SETS.get(name)
    if v is None:
        raise InputError.single(file, "study.pcc_voltage_limits", f"unknown set {name!r}; choose 'ieee519' or one "
                                "of " + ", ".join(repr(k) for k in PLANNING_SETS))
    thd, ind = _PLANNING[v]
    return InPlantLimits(name=name, thd_pct=thd, individual_pct=dict(ind), source=_PLANNING_SOURCE.format(v=v))
