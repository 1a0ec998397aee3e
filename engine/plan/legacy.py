"""Format versions 1 and 2, read and upgraded: plans saved before devices, bias lists and grounding (version 1)
and before segments, repeaters and four-wire pairs (version 2) open unchanged.

A version-2 document is one bus: validated by its own schema (BusPlanV2, the fields version 3 shares with it), then
restated as version 3 with the same meaning (version 3 only adds fields, each empty by default).

A version-1 document is validated by its own schema (so its problems name the fields it has), then upgraded to
version 2 with the same meaning:
- the driver's class (and any values it overrode) becomes the driver's device;
- every node becomes a device of the driver's class (version 1 had every node that may drive drive like the
  primary driver) with the node's unit loads and input capacitance where they differ from the class; its
  receiver is plain (no failsafe, +/-200 mV), as version 1 assumed of every receiver; on RS-422 its
  common-mode range is the standard's -7..+7 V, which version 1 applied to RS-422 receivers;
- role "transceiver" becomes may_drive true;
- the one bias network (or none) becomes a list of one (or none); no signal-ground conductor, no shield.
"""

from typing import Any, Literal

from pairline.engine.library import STANDARD_MINIMUM, TRANSCEIVERS
from pairline.engine.plan.checks import (
    class_problems,
    cross_field_problems,
    items,
    num,
    past_end_check,
    rs422_talker_problem,
    shared_problems,
)
from pairline.engine.plan.model import (
    DEFAULT_DEVICE,
    MAX_NODES,
    MAX_STUB_M,
    MAX_TRUNK_M,
    BiasSpec,
    Name,
    OneBus,
    PlanHead,
    TerminationSpec,
    _f,
    _Strict,
    ground_offset_field,
)
from pairline.engine.plan.problems import Problem, short
from pydantic import Field

_DRIVER_VALUES = ("rise_time_s", "open_circuit_v", "source_ohm")
RS422_RECEIVER_RANGE_V = (-7.0, 7.0)  # TIA/EIA-422-B receiver common-mode range, which version 1 applied


class DriverSpecV1(_Strict):
    name: Name = Field("driver", title="Driver name")
    position_m: float = _f("Driver position", "m", ge=0.0, le=MAX_TRUNK_M, default=0.0)
    stub_length_m: float = _f("Driver stub length", "m", ge=0.0, le=MAX_STUB_M, default=0.0)
    transceiver: str | None = Field("edge-100ns", title="Driver class")
    rise_time_s: float | None = _f("Driver rise time", "s", ge=0.5e-9, le=20e-6, default=None)
    open_circuit_v: float | None = _f("Driver open-circuit differential voltage", "V", ge=0.1, le=12.0, default=None)
    source_ohm: float | None = _f("Driver source resistance", "Ω", ge=0.0, le=1000.0, default=None)


class NodeSpecV1(_Strict):
    name: Name = Field(title="Node name")
    position_m: float = _f("Position", "m", ge=0.0, le=MAX_TRUNK_M)
    stub_length_m: float = _f("Stub length", "m", ge=0.0, le=MAX_STUB_M, default=0.0)
    role: Literal["receiver", "transceiver"] = Field(
        "receiver", title="Role", description="a transceiver may also drive (RS-485)"
    )
    # down to a millionth of a unit load (12 GΩ), an ideal probe that draws nothing
    unit_loads: float = _f("Unit loads", "UL", ge=1e-6, le=32.0, default=1.0)
    input_capacitance_f: float = _f("Input capacitance", "F", ge=0.0, le=2e-9, default=20e-12)
    ground_offset_v: float = ground_offset_field()


class BusPlanV1(PlanHead):
    format_version: Literal[1] = Field(1, title="Format version")
    driver: DriverSpecV1 = Field(default_factory=DriverSpecV1, title="Driver")
    nodes: list[NodeSpecV1] = Field(min_length=1, max_length=MAX_NODES, title="Nodes")
    terminations: list[TerminationSpec] = Field(default_factory=list, max_length=16, title="Terminations")
    bias: BiasSpec | None = Field(None, title="Failsafe bias")


def cross_field_problems_v1(data: dict[str, Any]) -> list[Problem]:
    """The cross-field checks of a version-1 document, on its own fields."""
    problems: list[Problem] = []
    past_end = past_end_check(data, problems)
    problems += shared_problems(data, past_end)
    if data.get("standard", "rs485") == "rs422":
        for i, node in enumerate(items(data, "nodes")):
            if isinstance(node, dict) and node.get("role") == "transceiver":
                problems.append(rs422_talker_problem(i, node, "role", "transceiver", "receiver", "is a transceiver"))
    if isinstance(data.get("bias"), dict):
        past_end("bias.position_m", "Bias position", num(data["bias"], "position_m", 0.0))
    problems += class_problems(
        data, "driver", "transceiver", DEFAULT_DEVICE, "Driver class", TRANSCEIVERS, DriverSpecV1, _DRIVER_VALUES
    )
    return problems


def upgrade_v1(v1: dict[str, Any]) -> dict[str, Any]:
    """A version-1 document as a version-2 document of the same meaning (see the module docstring). Meant for a
    validated document (BusPlanV1 dumped); one that does not validate is restated as far as it goes, its faulty
    values kept where version 2 has them, so the editor can show it with version 2's field names."""
    doc = {key: value for key, value in v1.items() if key not in ("format_version", "driver", "nodes", "bias")}
    doc["format_version"] = 2
    raw_driver, raw_nodes = v1.get("driver"), v1.get("nodes")
    drv: dict[str, Any] = raw_driver if isinstance(raw_driver, dict) else {}
    key = drv.get("transceiver", DEFAULT_DEVICE)
    base = TRANSCEIVERS.get(key, STANDARD_MINIMUM) if isinstance(key, str) else STANDARD_MINIMUM
    driven = {k: drv[k] for k in _DRIVER_VALUES if drv.get(k) is not None}

    def device(values: dict[str, Any]) -> Any:
        return key if key is not None and not values else {"class_key": key, **values}

    doc["default_device"] = key if isinstance(key, str) and key in TRANSCEIVERS else DEFAULT_DEVICE
    doc["driver"] = {k: drv[k] for k in ("name", "position_m", "stub_length_m") if k in drv} | {
        "device": device(driven)
    }
    rs422 = v1.get("standard") == "rs422"
    nodes = []
    for n in raw_nodes if isinstance(raw_nodes, list) else []:
        if not isinstance(n, dict):
            nodes.append(n)
            continue
        values = dict(driven)
        for field, class_value in (("unit_loads", base.unit_loads), ("input_capacitance_f", base.input_capacitance_f)):
            given = n.get(field, NodeSpecV1.model_fields[field].default)
            if given != class_value:
                values[field] = given
        if rs422:
            values["common_mode_min_v"], values["common_mode_max_v"] = RS422_RECEIVER_RANGE_V
        node = {k: n[k] for k in ("name", "position_m", "stub_length_m", "ground_offset_v") if k in n}
        node["device"] = device(values)
        node["may_drive"] = n.get("role", "receiver") == "transceiver"
        nodes.append(node)
    doc["nodes"] = nodes
    bias = v1.get("bias")
    doc["bias"] = [bias] if bias else []
    return doc


class BusPlanV2(OneBus):
    format_version: Literal[2] = Field(2, title="Format version")


def cross_field_problems_v2(data: dict[str, Any]) -> list[Problem]:
    """The cross-field checks of a version-2 document: version 3's on a plan of one bus, and no field of version 3
    inside a node (the schemas share the node): no pair it drives, no branch."""
    problems = cross_field_problems(data)
    later = {
        "drives_pair": ("pair it drives", "four-wire plans", "a four_wire return pair"),
        "branch": ("branch", "branches", "its branches"),
    }
    for i, node in enumerate(items(data, "nodes")):
        for key, (what, plans, needs) in later.items():
            if isinstance(node, dict) and key in node:
                problems.append(
                    Problem(
                        f"nodes.{i}.{key}",
                        f"Node {i + 1} {what}",
                        short(node[key]),
                        {"rule": f"a field of plan format 3 ({plans})"},
                        f"Node {i + 1} states {key}, a field of plan format 3 for {plans}; set format_version to 3 "
                        f"with {needs}, or remove it.",
                    )
                )
    return problems


def upgrade_v2(v2: dict[str, Any]) -> dict[str, Any]:
    """A version-2 document as version 3: the same fields, the same meaning (version 3's additions are empty)."""
    return v2 | {"format_version": 3}
