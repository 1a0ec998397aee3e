"""A branch as the stub it is electrically.

A branch (engine.plan BranchSpec) is a run of cable off the trunk with nodes along it and nothing at its end to
absorb the edge: to the trunk it is one stub, as long as the longest cable from its junction (its own length, or a
node's way along it plus that node's stub, whichever is longer). The stub rule holds it to the same limit as any
stub (TI SLLA272: delay at most a tenth of the driver's rise time), with the same tight band, and the finding
reports what the simulation measured at the branch's receivers: the ringing the rule is there to prevent.

When it breaks, the fixes are the stub rule's (a shorter branch, a slower edge within 30 % of a bit) and the
wiring that has no branch at all: the trunk run out to the branch's nodes and back (a daisy chain), each node on a
short stub of its own, which adds about twice the branch's length of trunk.
"""

from pairline.engine.bus import Bus
from pairline.engine.findings import Finding, Verdict
from pairline.engine.rules.margins import long_run_factor
from pairline.engine.rules.signal import Simulation
from pairline.engine.rules.stubs import (
    _SOURCE,
    MAX_TRANSITION_BIT_FRACTION,
    _length_text,
    max_stub_length_m,
    rise_time_needed_s,
    stub_verdict,
)
from pairline.engine.units import length_text, si_format


def check_branches(bus: Bus, simulation: Simulation) -> list[Finding]:
    """Rule "stub.branch": one finding per branch, its longest run from the junction against the stub limit."""
    vf = bus.cable.velocity_factor
    rise = bus.fastest_rise_time_s
    limit = max_stub_length_m(rise, vf)
    metrics = {m.receiver: m for m in simulation.metrics}
    findings = []
    for branch in bus.layout.branches:
        runs = {
            n.name: n.stub_length_m for n in bus.plan.nodes if bus.layout.along_m.get(n.name, ("",))[0] == branch.name
        }
        run = max([branch.length_m, *runs.values()])
        verdict = stub_verdict(run, limit)
        measured = [metrics[name] for name in runs if name in metrics]
        if measured:
            worst = max(measured, key=lambda m: (m.threshold_recrossings, m.undershoot_v, m.overshoot_ratio))
            ringing = (
                f"Simulated at its receivers ({simulation.driver_name} driving): worst at '{worst.receiver}', "
                f"overshoot {100 * worst.overshoot_ratio:.0f} % of the swing, ringback {worst.undershoot_v:.2f} V, "
                f"{worst.threshold_recrossings} re-crossing(s) of the threshold."
            )
        else:
            ringing = "No receiver on it: its open end reflects onto the trunk."
        at = length_text(branch.junction_position_m)
        detail = (
            f"Branch '{branch.name}' leaves the trunk at {at}, {length_text(branch.length_m)} long; its longest run "
            f"from the junction is {length_text(run)}. Rise time {si_format(rise, 's')}, velocity factor {vf:g}: "
            f"limit {length_text(limit)}, HOLDS to {length_text(limit / long_run_factor())}. {ringing}"
        )
        fix = ""
        if verdict is not Verdict.HOLDS:
            keep = limit / long_run_factor()
            names = ", ".join(f"'{n}'" for n in runs) or "its far end"
            fix = (
                f"Run the trunk out to {names} and back instead of branch '{branch.name}' (a daisy chain, each node on "
                f"a stub of <= {_length_text(keep)}; about {length_text(2.0 * run)} more trunk), or shorten the "
                f"branch's longest run to <= {_length_text(keep)}"
            )
            needed = rise_time_needed_s(run * long_run_factor(), vf)
            if needed <= MAX_TRANSITION_BIT_FRACTION / bus.plan.bit_rate_bps:
                fix += f", or use drivers with >= {si_format(needed, 's')} rise time."
            else:
                fix += "."
        findings.append(
            Finding(
                rule_id="stub.branch",
                title=f"Branch '{branch.name}' as a stub (delay within a tenth of the rise time)",
                verdict=verdict,
                value=run,
                limit=limit,
                unit="m",
                node=None,
                criterion="A branch is one stub to the trunk: its longest run from the junction <= 0.1 × t_r × VF × "
                "c0; tight when 10 % longer as built would exceed it",
                source=_SOURCE,
                fix=fix,
                detail=detail,
                branch=branch.name,
            )
        )
    return findings
