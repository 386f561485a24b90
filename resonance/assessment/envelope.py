"""The operating envelope: the supply and loading conditions every bank step is checked in.

Plain data from the case (``[envelope]``) and the plant model's supply figures; the study runs
the one assessment in each.  Nothing is computed here beyond scaling the linear loads.

References
----------
REFERENCES.md "Operating envelope": ANSI C84.1 Range A (+-5 % at the service) [memory], a tap
raising the secondary by its percentage and plants at 20-40 % of peak at night [common practice];
the high-voltage, light-load condition governs capacitor voltage duty and resonance
amplification (least resistive damping).
"""

from __future__ import annotations

from dataclasses import dataclass, replace

from resonance.memo import remember
from resonance.model.network import NetworkArrays

__all__ = ["Scenario", "scenarios_of", "scenario_arrays", "scenario_words", "SCENARIO_WORDS"]

#: how the terminal, the messages and the report name each scenario
SCENARIO_WORDS = {"nominal": "nominal supply", "weak": "weak supply", "high_voltage_light_load": "high voltage, light load",
                  "weak_light_load": "weak supply, light load", "all": "every scenario"}


def scenario_words(name: str) -> str:
    """The scenario's name in words (``"nominal supply"``, ``"high voltage, light load"``, ...)."""
    return SCENARIO_WORDS.get(name, name)


@dataclass(frozen=True)
class Scenario:
    """One operating condition.

    Attributes
    ----------
    name : str
        ``nominal``, ``weak``, ``high_voltage_light_load`` or ``weak_light_load`` [unitless].
    weak : bool
        Supply at its minimum short-circuit power [unitless].
    v_source_pu : float
        Supply voltage, tap included [pu].
    load_scale : float
        Linear loads as a fraction of the case's [unitless].
    source_scale : float
        Harmonic source currents as a fraction of the case's [unitless].
    """

    name: str
    weak: bool
    v_source_pu: float
    load_scale: float
    source_scale: float

    @property
    def words(self) -> str:
        """How the terminal and the report name it."""
        return scenario_words(self.name)


def scenarios_of(case, has_weak: bool) -> list[Scenario]:
    """The scenarios of a case, in order (``[envelope] scenarios`` or all that exist).

    Parameters
    ----------
    case : Case
        Validated case.
    has_weak : bool
        Whether the model has a weak supply (``sc_mva_min`` given).

    Returns
    -------
    list of Scenario
        ``nominal`` always first.
    """
    env = case.envelope
    light = env.light_load_pct / 100.0
    src = light if env.sources_follow_load else 1.0
    v_hi = env.v_max_pu * (1.0 + env.tap_pct / 100.0)
    every = [Scenario("nominal", False, 1.0, 1.0, 1.0), Scenario("weak", True, 1.0, 1.0, 1.0),
             Scenario("high_voltage_light_load", False, v_hi, light, src),
             Scenario("weak_light_load", True, 1.0, light, src)]
    wanted = set(env.scenarios) if env.scenarios is not None else {s.name for s in every}
    wanted.add("nominal")
    return [s for s in every if s.name in wanted and (has_weak or not s.weak)]


def scenario_arrays(nominal: NetworkArrays, weak: NetworkArrays | None, sc: Scenario) -> NetworkArrays:
    """The harmonic network of a scenario: the supply's arrays with the linear loads scaled [pu]."""
    base = weak if sc.weak else nominal
    if sc.load_scale == 1.0:
        return base
    # one object per network and scenario in a check, so every re-check shares its solves (memo)
    return remember("scenario_arrays", (base, sc.load_scale),
                    lambda: replace(base, load_p_pu=base.load_p_pu * sc.load_scale,
                                    load_q_pu=base.load_q_pu * sc.load_scale))
