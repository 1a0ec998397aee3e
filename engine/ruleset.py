"""Every rule, run once on a bus: the findings in report order and the simulation the signal rule ran.

The rules that depend on the terminators and the bias network (DESIGN_RULES) are cheap closed forms and DC
solves; the advice re-runs them on every design it weighs. The simulation runs once per plan checked.
"""

import dataclasses
import functools
from collections.abc import Callable
from dataclasses import dataclass

from pairline.engine.bus import Bus, view_key
from pairline.engine.findings import Finding, Verdict
from pairline.engine.rules.bias import check_failsafe_bias
from pairline.engine.rules.branches import check_branches
from pairline.engine.rules.common_mode import check_common_mode
from pairline.engine.rules.ground_wiring import check_ground_wiring
from pairline.engine.rules.length_rate import check_length_vs_rate
from pairline.engine.rules.loads import check_driver_load, check_unit_loads
from pairline.engine.rules.power import check_resistor_power
from pairline.engine.rules.rc_termination import check_ac_termination
from pairline.engine.rules.signal import Simulation, check_signal_integrity, simulate_bus, with_tolerance
from pairline.engine.rules.stubs import check_stubs
from pairline.engine.rules.termination import check_termination
from pairline.engine.rules.unterminated import check_unterminated
from pairline.engine.rules.voltage import check_receiver_voltage

RuleCheck = Callable[[Bus], list[Finding]]

RULES: tuple[RuleCheck, ...] = (
    check_unit_loads,
    check_driver_load,
    check_stubs,
    check_termination,
    check_unterminated,
    check_ac_termination,
    check_receiver_voltage,
    check_failsafe_bias,
    check_common_mode,
    check_ground_wiring,
    check_length_vs_rate,
    check_resistor_power,
    check_signal_integrity,
)
# Weighed for their verdicts only, so the bias rule skips its fix sentence here.
_BIAS_WITHOUT_FIX = functools.partial(check_failsafe_bias, with_fix=False)
DESIGN_RULES: tuple[RuleCheck, ...] = (
    check_unit_loads,
    check_driver_load,
    check_termination,
    check_unterminated,
    check_ac_termination,
    check_receiver_voltage,
    _BIAS_WITHOUT_FIX,
    check_resistor_power,
)
SIGNAL_RULE_IDS = frozenset({"signal.integrity", "signal.confirms"})


@dataclass(frozen=True, slots=True)
class RuleRun:
    """One pass of every rule over one bus."""

    bus: Bus
    findings: tuple[Finding, ...]
    simulation: Simulation


def run_rules(bus: Bus, *, quick: bool = False) -> RuleRun:
    """Every rule in RULES order; the signal rule from one simulation, which the run keeps.

    quick: the tolerance corners (engine.tolerance, the signal rule's tight band) are analysed only when the
    verdict needs them, when every other finding and every receiver's nominal waveform holds: a corner can only
    make a holding receiver tight, so the verdict is always that of the full run. Nor is a terminated bus
    simulated again without its terminators (engine.rules.signal.confirm_termination_rule), a what-if that holds
    whatever it shows."""
    simulation = simulate_bus(bus, tolerance=not quick)
    by_rule = {rule: rule(bus) for rule in RULES[:-1]}
    findings = [f for found in by_rule.values() for f in found]
    # the design rules' findings for this plan are among these: the advice weighs the plan as one of its designs
    by_rule[_BIAS_WITHOUT_FIX] = [dataclasses.replace(f, fix="") for f in by_rule[check_failsafe_bias]]
    bus.memo.get(("design_rules", view_key(bus)), lambda: tuple(f for rule in DESIGN_RULES for f in by_rule[rule]))
    if (
        quick
        and all(f.verdict is Verdict.HOLDS for f in findings)
        and all(j.verdict is Verdict.HOLDS for j, _ in simulation.worst)
    ):
        simulation = with_tolerance(bus, simulation)
    after_stubs = sum(1 for f in findings if f.rule_id in ("load.unit_loads", "load.driver", "stub.length"))
    findings[after_stubs:after_stubs] = check_branches(bus, simulation)
    findings += check_signal_integrity(bus, simulation, what_if=not quick)
    return RuleRun(bus=bus, findings=tuple(findings), simulation=simulation)


def run_design_rules(bus: Bus) -> tuple[Finding, ...]:
    """The rules a change of terminators or bias can move (no simulation), for their verdicts and values. Run
    once per plan of a layout: the design search, the advice's change list and the verified fixes weigh many
    plans, often the same (engine.bus.LayoutMemo)."""
    return bus.memo.get(("design_rules", view_key(bus)), lambda: tuple(f for rule in DESIGN_RULES for f in rule(bus)))
