"""Stand-ins for engine modules that have not landed on this branch yet (check, waveform, sweep).

Installed by conftest.py only when the real module cannot be imported; never shipped. Shapes follow
/work/contracts.md. Numbers here are placeholders for wiring tests, never check values.
"""

import sys
import types
from dataclasses import dataclass, field

import numpy as np

from engine import ENGINE_VERSION
from engine.bus import build_bus
from engine.findings import Finding, Verdict, worst


@dataclass(frozen=True, slots=True)
class TerminatorAdvice:
    position_m: float
    kind: str
    resistance_ohm: float
    capacitance_f: float | None
    power_rating_w: float


@dataclass(frozen=True, slots=True)
class BomItem:
    item: str
    value: str
    quantity: int
    rating: str
    note: str


@dataclass(frozen=True, slots=True)
class PlanSummary:
    terminators: tuple = ()
    bias: object = None
    max_stub_m: dict = field(default_factory=dict)
    spare_unit_loads: float = 0.0
    further_nodes: dict = field(default_factory=dict)
    max_bit_rate_bps: float = 0.0
    bom: tuple = ()


@dataclass(frozen=True, slots=True)
class PlanReport:
    plan: object
    bus: object
    findings: tuple
    summary: PlanSummary
    verdict: Verdict
    engine_version: str


def check_plan(plan):
    bus = build_bus(plan)
    findings = []
    for n in plan.nodes:
        verdict = Verdict.BREAKS if n.stub_length_m > 10 else Verdict.HOLDS
        findings.append(
            Finding(
                "stub.length",
                "Stub length",
                verdict,
                n.stub_length_m,
                10.0,
                "m",
                n.name,
                "fake",
                "fake",
                "shorten it" if verdict is Verdict.BREAKS else "",
            )
        )
    findings.append(Finding("load.unit_loads", "Unit loads", Verdict.HOLDS, 3.0, 32.0, "UL", None, "fake", "fake"))
    summary = PlanSummary(
        terminators=tuple(
            TerminatorAdvice(t.position_m, t.kind, t.resistance_ohm, t.capacitance_f, 0.25) for t in plan.terminations
        ),
        max_stub_m={n.name: 10.0 for n in plan.nodes},
        spare_unit_loads=29.0,
        further_nodes={"1 UL": 29},
        max_bit_rate_bps=1e6,
        bom=(BomItem("Terminator", "120 Ω", 2, "0.25 W", "fake"),),
    )
    return PlanReport(plan, bus, tuple(findings), summary, worst([f.verdict for f in findings]), ENGINE_VERSION)


def report_to_dict(report):
    return {"verdict": report.verdict.value}


@dataclass(frozen=True, slots=True)
class Waveforms:
    time_s: np.ndarray
    receiver_names: tuple
    v_diff_v: np.ndarray
    bits: str
    bit_time_s: float
    sample_times_s: np.ndarray


@dataclass(frozen=True, slots=True)
class Step:
    driver_names: tuple


def prbs_bits(n_bits=127, order=7, seed=1):
    return ("0101100111" * 13)[:n_bits]


def step_responses(bus, driver_names=None, *, max_time_s=None):
    return Step(tuple(driver_names or (bus.plan.driver.name,)))


def simulate_pattern(bus, pattern=None, driver_name=None, *, receiver_names=None, step=None):
    bits = pattern or bus.plan.test_pattern or prbs_bits()
    bit_time = 1.0 / bus.plan.bit_rate_bps
    t = np.linspace(0, bit_time * len(bits), 40 * len(bits))
    level = np.array([1.0 if b == "1" else -1.0 for b in bits])[np.minimum((t / bit_time).astype(int), len(bits) - 1)]
    all_names = [n.name for n in bus.plan.nodes]
    names = tuple(receiver_names) if receiver_names is not None else tuple(all_names)
    v = np.array([level * (1.5 - 0.01 * all_names.index(n)) for n in names])
    return Waveforms(t, names, v, bits, bit_time, (np.arange(len(bits)) + 0.5) * bit_time)


@dataclass(frozen=True, slots=True)
class ReceiverMetrics:
    receiver: str
    amplitude_v: float
    min_sample_v: float
    eye_height_v: float
    eye_width_ui: float
    overshoot_ratio: float
    threshold_recrossings: int
    sample_errors: int
    propagation_delay_s: float
    threshold_v: float = 0.2


def receiver_metrics(bus, *, driver_name=None, pattern=None, step=None):
    return tuple(
        ReceiverMetrics(n.name, 1.5 - 0.01 * i, 1.5 - 0.01 * i, 3.0 - 0.02 * i, 0.9, 0.0, 0, 0, 1e-8 * i)
        for i, n in enumerate(bus.plan.nodes)
    )


@dataclass(frozen=True, slots=True)
class Curve:
    bit_rate_bps: np.ndarray
    max_length_m: np.ndarray


def length_rate_curve(bus):
    rates = np.logspace(3, 7, 30)
    return Curve(rates, np.minimum(1200.0, 1e8 / rates))


def install() -> list[str]:
    installed = []
    for name, attrs in (
        ("engine.check", {"check_plan": check_plan, "report_to_dict": report_to_dict, "PlanReport": PlanReport}),
        (
            "engine.waveform",
            {
                "simulate_pattern": simulate_pattern,
                "Waveforms": Waveforms,
                "prbs_bits": prbs_bits,
                "step_responses": step_responses,
            },
        ),
        ("engine.metrics", {"receiver_metrics": receiver_metrics, "ReceiverMetrics": ReceiverMetrics}),
        ("engine.sweep", {"length_rate_curve": length_rate_curve}),
    ):
        try:
            __import__(name)
        except ImportError:
            module = types.ModuleType(name)
            module.__dict__.update(attrs)
            sys.modules[name] = module
            installed.append(name)
    return installed
