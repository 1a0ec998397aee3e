"""Shared test buses: a lossless 120 Ohm line probed at both ends by receivers that load nothing."""

from pairline.engine.bus import Bus, build_bus
from pairline.engine.plan import load_plan

VF = 0.7
LOSSLESS = {
    "class_key": None,
    "z0_ohm": 120.0,
    "velocity_factor": VF,
    "resistance_ohm_per_m": 0.0,
    "dielectric_loss_tangent": 0.0,
}
HIGH_Z = {"unit_loads": 1e-6, "input_capacitance_f": 0.0}  # a 12 GOhm probe: no load at all


def probed_line(
    source_ohm, far_ohm=None, length_m=100.0, rise_s=10e-9, cable=LOSSLESS, bit_rate_bps=1e6, **over
) -> Bus:
    """A driver (2 V open circuit) at one end of the line, probes 'near' and 'far' at both ends, and an optional
    far-end terminator."""
    doc = {
        "bit_rate_bps": bit_rate_bps,
        "trunk_length_m": length_m,
        "cable": cable,
        "driver": {"source_ohm": source_ohm, "rise_time_s": rise_s, "open_circuit_v": 2.0},
        "nodes": [
            {"name": "near", "position_m": 0.0, **HIGH_Z},
            {"name": "far", "position_m": length_m, **HIGH_Z},
        ],
        "terminations": [] if far_ohm is None else [{"position_m": length_m, "resistance_ohm": far_ohm}],
    }
    doc.update(over)
    return build_bus(load_plan(doc))
