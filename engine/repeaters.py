"""Where a repeater would make a bus pass that terminators and bias cannot: a split of the trunk into segments,
each a bus of its own with its own unit-load budget, length budget and ground (engine.plan.topology).

- Too many unit loads: the repeater goes between two neighbouring nodes, at the split that leaves both sides
  inside 32 UL most evenly (room to grow on both), the repeater's port counted on the master's side and its
  driver's receiver on the far side.
- Too long for the rate or the cable's loss: repeaters at equal spacing, as few as make every segment's length
  fit the budget the rule gives.
- A ground offset beyond the common-mode range: an isolated repeater between the last node on the master's
  ground and the first that is not, rated for the difference; the far segment then stands on its own ground.

Each proposal is a sentence with the position(s); the plan with the repeater is a plan of segments, which the
planner checks part by part once laid out.
"""

import math

from pairline.engine.bus import Bus
from pairline.engine.plan.topology import REPEATER_DELAY_S
from pairline.engine.rules.loads import RS485_UNIT_LOAD_BUDGET
from pairline.engine.units import length_text, si_format

_EACH = "each segment needs its own terminators at its two ends and its own bias"


def _outward(bus: Bus) -> list[tuple[float, str, float]]:
    """The nodes outward from the master along the trunk: (position, name, unit loads), nearest first."""
    x0 = bus.plan.driver.position_m
    nodes = [(n.position_m, n.name, bus.devices[n.name].unit_loads) for n in bus.plan.nodes]
    return sorted(nodes, key=lambda n: (abs(n[0] - x0), n[0]))


def split_for_unit_loads(bus: Bus, held_unit_loads: float) -> str:
    """A repeater position that leaves both sides inside the unit-load budget, as a sentence ("" when no single
    repeater does). held_unit_loads: what the bias networks take; the far segment needs its own, counted alike."""
    if bus.plan.standard != "rs485":
        return ""
    nodes = _outward(bus)
    port = bus.driver_device.unit_loads  # the repeater's port: one transceiver, as the master's own
    near = bus.driver_device.unit_loads + held_unit_loads + port
    total = sum(ul for *_, ul in nodes)
    splits = []  # (how uneven, k, near, far) for every split that fits
    for k in range(1, len(nodes)):
        near += nodes[k - 1][2]
        far = total - (near - bus.driver_device.unit_loads - held_unit_loads - port) + port + held_unit_loads
        if near <= RS485_UNIT_LOAD_BUDGET and far <= RS485_UNIT_LOAD_BUDGET:
            splits.append((abs(near - far), k, near, far))
    if not splits:
        return ""
    _, k, near, far = min(splits)
    a, b = nodes[k - 1], nodes[k]
    return (
        f"put a repeater at {length_text(0.5 * (a[0] + b[0]))}, between '{a[1]}' and '{b[1]}': the master's side "
        f"keeps {k} node(s) ({near:.3g} UL with the repeater's port and the bias), the far side becomes a segment "
        f"of {len(nodes) - k} node(s) ({far:.3g} UL with the repeater's driver and a bias like it); {_EACH}"
    )


def split_for_length(bus: Bus, path_m: float, budget_m: float, why: str) -> str:
    """Repeaters at equal spacing so every segment's path fits budget_m, as a sentence. why: what the budget is."""
    if budget_m <= 0.0 or path_m <= budget_m:
        return ""
    count = math.ceil(path_m / budget_m)  # segments
    plan = bus.plan
    x0 = plan.driver.position_m
    far = plan.trunk_length_m if plan.trunk_length_m - x0 >= x0 else 0.0
    step = (far - x0) / count
    spots = ", ".join(length_text(x0 + step * k) for k in range(1, count))
    delay = (count - 1) * REPEATER_DELAY_S
    return (
        f"put {'a repeater' if count == 2 else f'{count - 1} repeaters'} at {spots}: {count} segments of about "
        f"{length_text(path_m / count)} each, within the {length_text(budget_m)} {why}; the repeaters add about "
        f"{si_format(delay, 's')} of delay each way; {_EACH}"
    )


def isolated_split(bus: Bus, offsets_v: dict[str, float], limit_v: float) -> str:
    """An isolated repeater between the master's ground and the first node whose ground offset is beyond limit_v,
    as a sentence ("" when every node is within it)."""
    nodes = _outward(bus)
    first = next((k for k, (_, name, _) in enumerate(nodes) if abs(offsets_v.get(name, 0.0)) > limit_v), None)
    if first is None:
        return ""
    beyond = nodes[first]
    before = nodes[first - 1] if first > 0 else (bus.plan.driver.position_m, bus.plan.driver.name, 0.0)
    where = 0.5 * (before[0] + beyond[0])
    difference = max(abs(offsets_v.get(name, 0.0)) for _, name, _ in nodes[first:])
    return (
        f"put an isolated repeater at {length_text(where)}, between '{before[1]}' and '{beyond[1]}', its barrier "
        f"rated for at least the {difference:.3g} V between the grounds (a working voltage, not a test voltage): "
        f"the nodes from '{beyond[1]}' on become a segment on their own ground; {_EACH}"
    )
