"""Reading a plan document: the version it states decides the schema; version-1 and version-2 documents are
upgraded to version 3 (engine.plan.legacy). Bad input raises BusInputError listing every problem at once: field
checks and cross-field checks both run, so the user sees the whole list in one go."""

from typing import Any, TypeVar

from pairline.engine.plan.checks import cross_field_problems
from pairline.engine.plan.legacy import (
    BusPlanV1,
    BusPlanV2,
    cross_field_problems_v1,
    cross_field_problems_v2,
    upgrade_v1,
    upgrade_v2,
)
from pairline.engine.plan.model import DEFAULT_DEVICE, FORMAT_VERSIONS
from pairline.engine.plan.problems import BusInputError, Problem, problem_from_pydantic, short
from pairline.engine.plan.topology import BusPlan
from pydantic import BaseModel, ValidationError


def load_plan(data: Any) -> BusPlan:
    """Validate a plan document (a dict from JSON) of any format version; the plan comes back as version 3.
    A document that states no version is version 1 (every document written before version 2 was)."""
    if not isinstance(data, dict):
        raise BusInputError(
            [Problem("", "Plan", short(data), {"type": "JSON object"}, "A bus plan must be a JSON object.")]
        )
    version = data.get("format_version", 1)
    if version == 1 and not isinstance(version, bool):
        v1 = _validated(BusPlanV1, data, cross_field_problems_v1)
        return _validated(BusPlan, upgrade_v2(upgrade_v1(v1.model_dump(mode="json"))), cross_field_problems)
    if version == 2 and not isinstance(version, bool):
        v2 = _validated(BusPlanV2, with_default_classes(data), cross_field_problems_v2)
        return BusPlan.model_validate(upgrade_v2(v2.model_dump(mode="json")))
    if version == 3 and not isinstance(version, bool):
        return _validated(BusPlan, with_default_classes(data), cross_field_problems)
    raise BusInputError(
        [
            Problem(
                "format_version",
                "Format version",
                short(version),
                {"choices": list(FORMAT_VERSIONS)},
                f"Format version is {short(version)!r}; allowed one of {', '.join(map(str, FORMAT_VERSIONS))}.",
            )
        ]
    )


M = TypeVar("M", bound=BaseModel)


def _validated(model: type[M], data: dict[str, Any], checks: Any) -> M:
    problems: list[Problem] = []
    plan: M | None = None
    try:
        plan = model.model_validate(data)
    except ValidationError as exc:
        problems = [problem_from_pydantic(e, data, model) for e in exc.errors()]
    seen = {p.field for p in problems}
    problems += [p for p in checks(data) if p.field not in seen]
    if problems or plan is None:
        raise BusInputError(problems)
    return plan


def current_document(data: Any) -> Any:
    """A plan document in the current format: a version-1 or version-2 document upgraded (engine.plan.legacy),
    whether it validates or not, so the editor shows it under version 3's field names; anything else as it is."""
    if not isinstance(data, dict) or isinstance(data.get("format_version"), bool):
        return data
    version = data.get("format_version", 1)
    if version == 1:
        return upgrade_v2(upgrade_v1(data))
    if version == 2:
        return upgrade_v2(data)
    return data


def with_default_classes(data: dict[str, Any]) -> dict[str, Any]:
    """A device object that names no class takes the plan's default class: it is written into the document, so
    the validated plan states every node's class."""
    default = data.get("default_device", DEFAULT_DEVICE)

    def filled(part: Any) -> Any:
        device = part.get("device") if isinstance(part, dict) else None
        if isinstance(device, dict) and "class_key" not in device and isinstance(default, str):
            return part | {"device": {"class_key": default, **device}}
        return part

    def filled_nodes(part: Any) -> Any:
        if isinstance(part, dict) and isinstance(part.get("nodes"), list):
            return part | {"nodes": [filled(n) for n in part["nodes"]]}
        return part

    out: dict[str, Any] = filled_nodes(dict(data))
    if "driver" in out:
        out["driver"] = filled(out["driver"])
    for key, fill in (("segments", filled_nodes), ("repeaters", filled)):
        if isinstance(out.get(key), list):
            out[key] = [fill(part) for part in out[key]]
    return out


def plan_to_dict(plan: BusPlan) -> dict[str, Any]:
    """The plan as its version-3 JSON document (defaults included, so a saved file states every value; a device
    with nothing overridden is written as its class key)."""
    return plan.model_dump(mode="json")
