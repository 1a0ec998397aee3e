"""The bus plan: one versioned JSON document (format version 3), validated by one pydantic model.

The same model validates plan files, the JSON API, the CLI and saved plans; the web form's field names are
the dotted paths of this model. Version-1 and version-2 documents are read by their own schemas and upgraded on
load (engine.plan.legacy). Bad input raises `BusInputError` listing every problem at once, each with its field
path, value and allowed range. Pydantic is used in this package only.
"""

from pairline.engine.plan.cable import ResolvedCable, resolve_cable
from pairline.engine.plan.checks import DEVICE_CHOICES, cross_field_problems
from pairline.engine.plan.load import current_document, load_plan, plan_to_dict
from pairline.engine.plan.model import (
    DEFAULT_DEVICE,
    DEVICE_VALUES,
    FORMAT_VERSIONS,
    MAX_BIAS_NETWORKS,
    MAX_BIAS_OHM,
    MAX_NODES,
    MAX_STUB_M,
    MAX_TRUNK_M,
    MIN_BIAS_OHM,
    MIN_TRUNK_M,
    NONZERO_MIN_BY_UNIT,
    PLAN_FORMAT,
    PLAN_FORMAT_VERSION,
    BiasSpec,
    CableSpec,
    DeviceSpec,
    DriverSpec,
    GroundingSpec,
    NodeSpec,
    PlanHead,
    ProbeSpec,
    SamplingWindowSpec,
    TerminationSpec,
    ToleranceSpec,
)
from pairline.engine.plan.problems import BusInputError, Problem, allowed_of, field_info
from pairline.engine.plan.topology import (
    MAIN_SEGMENT,
    MAX_BRANCHES,
    MAX_SEGMENTS,
    REPEATER_DELAY_SOURCE,
    BranchSpec,
    BusPlan,
    FourWireSpec,
    RepeaterSpec,
    SegmentSpec,
)

UNIT_LOAD_OHM = 12_000.0  # one unit load, per line: 12 V / 1 mA (TIA-485-A)


def input_resistance_ohm(unit_loads: float) -> float:
    """A receiver's input as the load budget counts it: 12 kOhm per unit load across the pair (TIA-485-A's 54 Ohm
    test load read as 32 UL with two 120 Ohm terminators; engine.devices explains the choice)."""
    return UNIT_LOAD_OHM / unit_loads


__all__ = [
    "DEFAULT_DEVICE",
    "DEVICE_CHOICES",
    "DEVICE_VALUES",
    "FORMAT_VERSIONS",
    "MAX_BIAS_NETWORKS",
    "MAX_BIAS_OHM",
    "MAX_NODES",
    "MAX_STUB_M",
    "MAX_TRUNK_M",
    "MIN_BIAS_OHM",
    "MIN_TRUNK_M",
    "NONZERO_MIN_BY_UNIT",
    "PLAN_FORMAT",
    "PLAN_FORMAT_VERSION",
    "UNIT_LOAD_OHM",
    "BiasSpec",
    "BusInputError",
    "BranchSpec",
    "BusPlan",
    "CableSpec",
    "DeviceSpec",
    "DriverSpec",
    "FourWireSpec",
    "MAIN_SEGMENT",
    "MAX_BRANCHES",
    "MAX_SEGMENTS",
    "REPEATER_DELAY_SOURCE",
    "RepeaterSpec",
    "SegmentSpec",
    "GroundingSpec",
    "NodeSpec",
    "PlanHead",
    "Problem",
    "ProbeSpec",
    "ResolvedCable",
    "SamplingWindowSpec",
    "TerminationSpec",
    "ToleranceSpec",
    "allowed_of",
    "cross_field_problems",
    "current_document",
    "field_info",
    "input_resistance_ohm",
    "load_plan",
    "plan_to_dict",
    "resolve_cable",
]
