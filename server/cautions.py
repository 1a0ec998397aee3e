"""Safety cautions shown with every checked plan, each marked when something in the plan calls for it."""

from typing import Any

from pairline.engine.plan import BusPlan
from pairline.server.quantities import length_text

# The -7..+12 V common-mode range leaves about ±7 V for ground offset once the driver's 2.5 V and noise are
# counted (Intersil, "High-Speed RS-485 Transceiver and Applications").
OFFSET_BUDGET_V = 7.0
# Above this a difference between grounds is no signalling matter: 50 V AC is the conventional touch-voltage
# limit for ordinary dry locations (IEC 60364-4-41; from memory).
DANGER_OFFSET_V = 50.0
# Pairline's own prompt for the surge caution; the caution itself is always shown, for any outdoor run.
LONG_RUN_M = 100.0

SAFETY_CAUTIONS = (
    (
        "ground",
        "Ground offsets",
        "Nodes powered from different supplies or buildings rarely share one ground. The offset adds to the "
        "common-mode voltage every receiver must tolerate (−7 V to +12 V for RS-485). Run a signal-ground "
        "conductor with a series resistor at each node, or isolate the transceivers; never rely on earth alone.",
    ),
    (
        "surge",
        "Surges on long and outdoor runs",
        "Cable that runs outdoors, between buildings or beside power wiring collects lightning and switching "
        "surges. Fit surge protection where the cable enters each building, earth the shield at one point, and "
        "choose parts tested to the surge, burst and ESD levels of the site.",
    ),
    (
        "isolation",
        "Isolation",
        "Where the offset may exceed the common-mode range, or the sites have separate earthing systems, use "
        "galvanically isolated transceivers and isolated supplies rather than a bare ground wire between sites.",
    ),
    (
        "codes",
        "Codes and licensed practice",
        "This plan covers signals only. Follow local electrical codes, and have licensed electricians design and "
        "inspect anything that connects to mains power, earthing systems or equipment in other buildings.",
    ),
)


def cautions_data(plan: BusPlan) -> list[dict[str, Any]]:
    """The standing cautions, each marked `applies` with a reason when something in this plan calls for it."""
    offsets = [abs(n.ground_offset_v) for n in plan.nodes]
    largest = max(offsets, default=0.0)
    reasons = {
        "ground": f"largest ground offset in this plan: {largest:g} V" if largest > 0 else "",
        "surge": f"trunk length {length_text(plan.trunk_length_m, plan.display_units)}"
        if plan.trunk_length_m >= LONG_RUN_M
        else "",
        "isolation": f"a node sits {largest:g} V from the driver's ground" if largest >= OFFSET_BUDGET_V else "",
        "codes": "always",
    }
    return [
        {"key": key, "title": title, "text": text, "applies": bool(reasons[key]), "reason": reasons[key]}
        for key, title, text in SAFETY_CAUTIONS
    ]


def danger_data(plan: BusPlan) -> dict[str, Any] | None:
    """The stop-work caution when any node's ground sits more than DANGER_OFFSET_V from the driver's; else None."""
    over = [(n.name, n.ground_offset_v) for n in plan.nodes if abs(n.ground_offset_v) > DANGER_OFFSET_V]
    if not over:
        return None
    nodes = ", ".join(f"'{name}' ({offset:+g} V)" for name, offset in over)
    return {
        "limit_v": DANGER_OFFSET_V,
        "nodes": [{"name": name, "ground_offset_v": offset} for name, offset in over],
        "title": "Danger: ground difference above 50 V",
        "text": (
            f"This plan puts the ground of {nodes} more than {DANGER_OFFSET_V:g} V from the driver's ground. A "
            "difference that large is a shock hazard or the sign of an earth fault, not a signalling problem. "
            "Stop: connect no bus cable between these points, and have a licensed electrician find and clear the "
            "cause first. Follow local electrical codes."
        ),
    }
