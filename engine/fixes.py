"""Signal verdicts from the simulated waveforms, and fixes found by re-simulating, not by rule of thumb.

Verdict of one receiver (metrics from engine.metrics, threshold +/-200 mV of TIA-485-A / TIA-422-B receivers):
- BREAKS when a sampled bit is not beyond the threshold on its driven side (sample_errors), when the waveform
  falls back through the threshold after crossing it (threshold_recrossings: a false extra edge), when the
  inner eye at the sampling instant is under 2 x threshold (the 1s and 0s do not both clear the undefined
  band), or when the level has not settled beyond the threshold by the sampling instant.
- HOLDS otherwise. The tight band is not judged here: a receiver that holds with nominal parts but breaks at
  its worst tolerance corner is TIGHT (engine.rules.signal.banded, engine.tolerance).

A fix is one parameter changed until the failing receivers stop breaking, found by re-simulating the changed
bus: bisection over a continuous parameter (a stub length, a terminator value, the bit rate; MAX_BISECTIONS
re-simulations each, so the value is within (1/2)^MAX_BISECTIONS of its search range), or an ordered search
over the library's driver classes. Each re-simulation judges only the receivers that failed (their waveforms
are computed from the whole bus's step response), which keeps a fix to a few tens of milliseconds; all fixes
of one check share a budget of re-simulations (resimulation_budget).
"""

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass

from pairline.engine.bus import Bus, build_bus
from pairline.engine.findings import Verdict
from pairline.engine.library import TRANSCEIVERS
from pairline.engine.metrics import ReceiverMetrics, SampledLevels, receiver_metrics
from pairline.engine.plan import BusPlan, DeviceSpec, TerminationSpec
from pairline.engine.rules.cable_ends import end_name, nearest_end_m, required_ends_m
from pairline.engine.rules.preferred import nearest_preferred, preferred_at_or_below
from pairline.engine.units import si_format
from pairline.engine.waveform import StepResponses, default_pattern, pattern_duration_s, step_responses

MAX_BISECTIONS = 5
MAX_STUB_CANDIDATES = 2
MAX_RESIMULATIONS = 32
MAX_RESIMULATIONS_LARGE = 12
STANDARD_RATES_BPS = (
    1200.0,
    2400.0,
    4800.0,
    9600.0,
    19200.0,
    38400.0,
    57600.0,
    115200.0,
    250e3,
    500e3,
    1e6,
    2e6,
    5e6,
    10e6,
    20e6,
    50e6,
)


@dataclass(frozen=True, slots=True)
class SignalJudgement:
    """Verdict of one receiver's simulated waveform with the reasons, worst first."""

    receiver: str
    verdict: Verdict
    reasons: tuple[str, ...]
    metrics: ReceiverMetrics


@dataclass(frozen=True, slots=True)
class ComputedFix:
    """One parameter change that, re-simulated, makes the failing receivers pass."""

    parameter: str  # "stub_length_m", "termination_ohm", "driver_class", "bit_rate_bps"
    node: str | None  # the node whose stub changes; None for bus-wide changes
    value: float | str  # the new value (metres, ohms, a driver class key, bit/s)
    unit: str
    sentence: str
    simulations: int  # re-simulations spent finding it


def level_breaks(m: ReceiverMetrics | SampledLevels) -> list[str]:
    """Why the levels over the sampling windows break (criteria in the module docstring): none when they hold."""
    th = m.threshold_v
    breaks = []
    if m.sample_errors > 0:
        breaks.append(f"{m.sample_errors} sampled bit(s) not beyond ±{th * 1e3:.0f} mV (lowest {m.min_sample_v:.2f} V)")
    if m.eye_height_v < 2.0 * th:
        breaks.append(f"eye closed: inner eye {m.eye_height_v:.2f} V at the sampling instant, needs ≥ {2 * th:.1f} V")
    return breaks


def judge_metrics(m: ReceiverMetrics) -> SignalJudgement:
    """HOLDS or BREAKS of one receiver from its metrics (criteria in the module docstring)."""
    th = m.threshold_v
    breaks = level_breaks(m)
    if m.threshold_recrossings > 0:
        breaks.append(
            f"falls back through the ±{th * 1e3:.0f} mV threshold {m.threshold_recrossings} time(s) after an edge "
            f"(ringback {m.undershoot_v:.2f} V): a false extra edge"
        )
    if not math.isfinite(m.settle_time_s) or m.settle_margin_s < 0.0:
        breaks.append("not settled beyond the threshold by the sampling instant")
    return SignalJudgement(m.receiver, Verdict.BREAKS if breaks else Verdict.HOLDS, tuple(breaks), m)


def judge_bus(
    bus: Bus,
    *,
    driver_name: str | None = None,
    receivers: Sequence[str] | None = None,
    pattern: str | None = None,
    step: StepResponses | None = None,
) -> dict[str, SignalJudgement]:
    """Simulate the bit pattern (None: the plan's, else the default PRBS) and judge each receiver (None: all).

    Every receiver: engine.metrics.receiver_metrics (RECEIVERS_PER_PASS at a time). Named receivers: their
    waveforms only, from the whole bus's edge response. step: that driver's edge responses, if already known.
    """
    driver = driver_name or bus.plan.driver.name
    bit_time_s = 1.0 / bus.plan.bit_rate_bps
    bits = pattern or bus.plan.test_pattern
    watched = None if receivers is None else list(receivers)
    wanted = set(watched) if watched is not None else {n.name for n in bus.plan.nodes}
    if step is None or step.driver_names[:1] != (driver,) or not wanted <= set(step.receiver_names):
        # only the watched receivers' spectra and transforms are computed
        step = step_responses(bus, [driver], max_time_s=pattern_duration_s(bus, bits), receiver_names=watched)
    if bits is None:
        bits = default_pattern(step, bit_time_s)
    metrics = receiver_metrics(bus, driver_name=driver, pattern=bits, step=step, receiver_names=watched)
    return {m.receiver: judge_metrics(m) for m in metrics}


# --- fixes -------------------------------------------------------------------------------------------------


def resimulation_budget(bus: Bus) -> int:
    """Re-simulations allowed for all fixes of one check: 32, or 12 on buses of more than 64 nodes."""
    return MAX_RESIMULATIONS if len(bus.plan.nodes) <= 64 else MAX_RESIMULATIONS_LARGE


class _Trial:
    """Counts re-simulations; a candidate plan passes when none of the watched receivers breaks."""

    def __init__(self, bus: Bus, failing: Sequence[str], driver_name: str | None) -> None:
        self.bus = bus
        self.failing = list(failing)
        self.driver_name = driver_name
        self.count = 0

    def passes(self, plan: BusPlan) -> bool:
        """Re-simulate; once the budget is spent every further candidate counts as failing, so a fix already
        found stays verified and the search just stops refining."""
        if self.count >= resimulation_budget(self.bus):
            return False
        self.count += 1
        judged = judge_bus(build_bus(plan, self.bus.layout), driver_name=self.driver_name, receivers=self.failing)
        return all(j.verdict is not Verdict.BREAKS for j in judged.values())


def _bisect(passes: Callable[[float], bool], good: float, bad: float, steps: int, log: bool = False) -> float:
    """The passing end of [good, bad] after `steps` halvings; passes(good) is known true, passes(bad) false."""
    for _ in range(steps):
        mid = math.sqrt(good * bad) if log else 0.5 * (good + bad)
        if passes(mid):
            good = mid
        else:
            bad = mid
    return good


def _with_stub(plan: BusPlan, name: str, length_m: float) -> BusPlan:
    if name == plan.driver.name:
        return plan.model_copy(update={"driver": plan.driver.model_copy(update={"stub_length_m": length_m})})
    nodes = [n.model_copy(update={"stub_length_m": length_m}) if n.name == name else n for n in plan.nodes]
    return plan.model_copy(update={"nodes": nodes})


def stub_fixes(bus: Bus, trial: _Trial) -> list[ComputedFix]:
    """Longest stub (of the failing receivers', and the bus's longest) at which the failing receivers pass."""
    plan = bus.plan
    stubs = {n.name: n.stub_length_m for n in plan.nodes}
    stubs[plan.driver.name] = plan.driver.stub_length_m
    candidates = [n for n in trial.failing if stubs.get(n, 0.0) > 0.0]
    longest = max(stubs, key=lambda n: stubs[n])
    candidates = sorted(set(candidates) | ({longest} if stubs[longest] > 0.0 else set()), key=lambda n: -stubs[n])
    out = []
    for name in candidates[:MAX_STUB_CANDIDATES]:
        before = trial.count
        if not trial.passes(_with_stub(plan, name, 0.0)):
            continue

        def shorter(length_m: float, name: str = name) -> bool:
            return trial.passes(_with_stub(plan, name, length_m))

        best = _bisect(shorter, 0.0, stubs[name], MAX_BISECTIONS)
        keep_m = math.floor(best * 20.0) / 20.0  # down to 5 cm, so the advice errs short
        text = f"shorten the stub of '{name}' from {stubs[name]:.3g} m to at most {keep_m:.2f} m"
        out.append(ComputedFix("stub_length_m", name, keep_m, "m", text, trial.count - before))
    return out


def _with_end_terminators(bus: Bus, resistance_ohm: float) -> BusPlan:
    """The plan with every required cable end terminated by resistance_ohm (end terminators replaced)."""
    plan = bus.plan
    ends = required_ends_m(bus)
    kept = [t for t in plan.terminations if nearest_end_m(bus, t.position_m) not in ends]
    new = [TerminationSpec(position_m=e, kind="parallel", resistance_ohm=resistance_ohm) for e in ends]
    return plan.model_copy(update={"terminations": kept + new})


def termination_fix(bus: Bus, trial: _Trial) -> ComputedFix | None:
    """Terminators at the required ends: Z0 (nearest E24 value) when that passes, with the range found by
    bisection up to ten times Z0 in which the failing receivers still pass (the lightest load that works)."""
    before = trial.count
    z0 = bus.cable.z0_ohm
    if not trial.passes(_with_end_terminators(bus, z0)):
        return None
    best = _bisect(lambda r: trial.passes(_with_end_terminators(bus, r)), z0, 10.0 * z0, MAX_BISECTIONS, log=True)
    value = nearest_preferred(z0)
    ends = " and ".join(end_name(bus, e) for e in required_ends_m(bus))
    terms = bus.plan.terminations
    if any(t.kind == "rc" for t in terms):
        head = f"replace the RC terminators at {ends} with plain {value:g} Ω resistors"
    elif terms:
        head = f"set the terminators at {ends} to {value:g} Ω"
    else:
        head = f"fit {value:g} Ω terminators at {ends}"
    text = (
        f"{head}, the cable's Z0 (in simulation anything from {z0:g} Ω up to {preferred_at_or_below(best):g} Ω passes)"
    )
    return ComputedFix("termination_ohm", None, value, "Ω", text, trial.count - before)


def driver_fix(bus: Bus, trial: _Trial) -> ComputedFix | None:
    """The library driver class nearest in rise time to the plan's (on a log scale) that makes them pass and
    switches within 30 % of a bit (TI SLLA628); of classes with one edge, the one like the driver's own device."""
    before = trial.count
    rise = bus.driver.rise_time_s
    bit_s = 1.0 / bus.plan.bit_rate_bps
    own = bus.driver_device
    keys = [k for k, t in TRANSCEIVERS.items() if t.rise_time_s <= 0.3 * bit_s and t.rise_time_s != rise]
    # Nearest edge first; among classes of one edge, the one whose receiver and isolation match the driver's own.
    keys.sort(
        key=lambda k: (
            abs(math.log(TRANSCEIVERS[k].rise_time_s / rise)),
            (TRANSCEIVERS[k].failsafe, TRANSCEIVERS[k].isolated) != (own.failsafe, own.isolated),
        )
    )
    plan = bus.plan
    for key in keys:
        drv = plan.driver.model_copy(update={"device": DeviceSpec(class_key=key)})
        if trial.passes(plan.model_copy(update={"driver": drv})):
            cls = TRANSCEIVERS[key]
            text = f"use a driver of class '{key}' ({cls.label}, rise time {si_format(cls.rise_time_s, 's')})"
            return ComputedFix("driver_class", None, key, "", text, trial.count - before)
    return None


def bit_rate_fix(bus: Bus, trial: _Trial) -> ComputedFix | None:
    """Highest bit rate (rounded down to a common rate) at which the failing receivers pass."""
    before = trial.count
    plan = bus.plan
    rate = plan.bit_rate_bps
    low = max(50.0, rate / 1000.0)

    def at(r: float) -> bool:
        return trial.passes(plan.model_copy(update={"bit_rate_bps": r}))

    if not at(low):
        return None
    best = _bisect(at, low, rate, MAX_BISECTIONS + 2, log=True)
    common = [r for r in STANDARD_RATES_BPS if r <= best]
    value = common[-1] if common and at(common[-1]) else best
    text = f"lower the bit rate to {si_format(value, 'bit/s')} or less"
    return ComputedFix("bit_rate_bps", None, value, "bit/s", text, trial.count - before)


def compute_fixes(bus: Bus, failing: Sequence[str], *, driver_name: str | None = None) -> list[ComputedFix]:
    """Fixes for receivers whose simulated waveform BREAKS: a stub length, a terminator value, a driver class
    and a bit rate, each found by re-simulating (see the module docstring). Empty when nothing helps or
    nothing fails."""
    if not failing:
        return []
    trial = _Trial(bus, failing, driver_name)
    fixes: list[ComputedFix] = stub_fixes(bus, trial)
    for find in (termination_fix, driver_fix, bit_rate_fix):
        fix = find(bus, trial)
        if fix is not None:
            fixes.append(fix)
    return fixes
