"""The validated plan with its cable and driver resolved: the one input every rule and the solver take."""

from dataclasses import dataclass

from pairline.engine.plan import BusPlan, NodeSpec, ResolvedCable, ResolvedDriver, resolve_cable, resolve_driver


@dataclass(frozen=True, slots=True)
class Bus:
    plan: BusPlan
    cable: ResolvedCable
    driver: ResolvedDriver

    @property
    def nodes(self) -> list[NodeSpec]:
        return list(self.plan.nodes)

    @property
    def drivers_possible(self) -> list[str]:
        """Names of every node that may drive: the primary driver, then RS-485 transceiver nodes."""
        return [self.plan.driver.name] + [n.name for n in self.plan.nodes if n.role == "transceiver"]


def build_bus(plan: BusPlan) -> Bus:
    return Bus(plan=plan, cable=resolve_cable(plan.cable), driver=resolve_driver(plan.driver))
