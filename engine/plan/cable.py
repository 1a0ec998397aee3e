"""The plan's cable with every value filled in, from its library class and the plan's overrides."""

from dataclasses import dataclass

from pairline.engine.library import CABLES, CableClass
from pairline.engine.plan.model import CableSpec
from pairline.engine.units import SPEED_OF_LIGHT_M_PER_S


@dataclass(frozen=True, slots=True)
class ResolvedCable:
    """The cable with every value filled in, from its class and the plan's overrides."""

    label: str
    z0_ohm: float
    velocity_factor: float
    resistance_ohm_per_m: float
    capacitance_f_per_m: float
    skin_effect_onset_hz: float | None
    dielectric_loss_tangent: float
    source: str


def resolve_cable(spec: CableSpec) -> ResolvedCable:
    """Class values with the plan's overrides on top. Assumes a validated plan."""
    base: CableClass | None = CABLES.get(spec.class_key) if spec.class_key else None
    z0 = spec.z0_ohm if spec.z0_ohm is not None else base.z0_ohm if base else None
    vf = spec.velocity_factor if spec.velocity_factor is not None else base.velocity_factor if base else None
    r = (
        spec.resistance_ohm_per_m
        if spec.resistance_ohm_per_m is not None
        else (base.resistance_ohm_per_m if base else None)
    )
    if z0 is None or vf is None or r is None:
        raise ValueError("cable not validated: z0_ohm, velocity_factor and resistance_ohm_per_m required")
    c = spec.capacitance_f_per_m if spec.capacitance_f_per_m is not None else (1.0 / (z0 * vf * SPEED_OF_LIGHT_M_PER_S))
    onset = (
        spec.skin_effect_onset_hz
        if spec.skin_effect_onset_hz is not None
        else (base.skin_effect_onset_hz if base else None)
    )
    tan_d = (
        spec.dielectric_loss_tangent
        if spec.dielectric_loss_tangent is not None
        else (base.dielectric_loss_tangent if base else 0.0)
    )
    customised = base is None or any(getattr(spec, k) is not None for k in CableSpec.model_fields if k != "class_key")
    label = (base.label if base else "Custom cable") + (" (custom values)" if base and customised else "")
    source = base.source if base and not customised else "values entered by the user"
    return ResolvedCable(label, z0, vf, r, c, onset, tan_d, source)
