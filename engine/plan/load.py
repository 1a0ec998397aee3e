"""Reading a plan document: the version it states decides the schema; a version-1 document is upgraded to
version 2 (engine.plan.legacy). Bad input raises BusInputError listing every problem at once: field checks and
cross-field checks both run, so the user sees the whole list in one go."""

from typing import Any, TypeVar

from pairline.engine.plan.checks import cross_field_problems
from pairline.engine.plan.legacy import BusPlanV1, cross_field_problems_v1, upgrade_v1
from pairline.engine.plan.model import DEFAULT_DEVICE, FORMAT_VERSIONS, BusPlan
from pairline.engine.plan.problems import BusInputError, Problem, problem_from_pydantic, short
from pydantic import BaseModel, ValidationError


def load_plan(data: Any) -> BusPlan:
    """Validate a plan document (a dict from JSON) of either format version; the plan comes back as version 2.
    A document that states no version is version 1 (every document written before version 2 was)."""
    if not isinstance(data, dict):
        raise BusInputError(
            [Problem("", "Plan", short(data), {"type": "JSON object"}, "A bus plan must be a JSON object.")]
        )
    version = data.get("format_version", 1)
    if version == 1 and not isinstance(version, bool):
        v1 = _validated(BusPlanV1, data, cross_field_problems_v1)
        return _validated(BusPlan, upgrade_v1(v1.model_dump(mode="json")), cross_field_problems)
    if version == 2 and not isinstance(version, bool):
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
    """A plan document in the current format: a version-1 document upgraded (engine.plan.legacy), whether it
    validates or not, so the editor shows it under version 2's field names; anything else as it is."""
    if (
        isinstance(data, dict)
        and data.get("format_version", 1) == 1
        and not isinstance(data.get("format_version"), bool)
    ):
        return upgrade_v1(data)
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

    out = dict(data)
    if "driver" in out:
        out["driver"] = filled(out["driver"])
    if isinstance(out.get("nodes"), list):
        out["nodes"] = [filled(n) for n in out["nodes"]]
    return out


def plan_to_dict(plan: BusPlan) -> dict[str, Any]:
    """The plan as its version-2 JSON document (defaults included, so a saved file states every value; a device
    with nothing overridden is written as its class key)."""
    return plan.model_dump(mode="json")
