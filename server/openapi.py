"""The published OpenAPI document (/openapi.json): every route, with the bus plan's own schema as the request
body of the JSON API and the error envelope as its refusals.

Routes read their bodies themselves (to cap nesting before parsing and to answer with the envelope), so they
declare those bodies here through `openapi_extra`; the schema comes from the one plan model, engine.plan.
"""

from typing import Any

from fastapi import FastAPI
from fastapi.openapi.utils import get_openapi
from pairline.engine.plan import BusPlan

_REF = "#/components/schemas/{model}"
DESCRIPTION = (
    "Check an RS-485 / RS-422 bus plan (POST /api/check), save it for a link (POST /api/plans), read it back "
    "(GET /api/plans/{id}). Every page has a JSON twin at its path plus .json. Refusals answer with one envelope: "
    "the status and every problem with its field, value and allowed range. POST /api/check gives the full "
    "check's verdict; it analyses the component tolerance corners only when that verdict needs them, so while "
    "another finding is tight or failing, a receiver that is tight only at its worst tolerance corner is listed on "
    "the saved plan's page alone; nor does it simulate a terminated bus without its terminators (a what-if that "
    "holds either way; its finding says it was not simulated). Its answer holds the verdict and counts, the "
    "findings that do not hold with their fixes, the spare capacity, the summary, the advice and the engine "
    "report of every finding of the plan; the advised plan's own findings are left out (its verdict, counts and "
    "changes are given; a saved plan's page twin has them)."
)
PROBLEM_SCHEMA: dict[str, Any] = {
    "type": "object",
    "required": ["field", "label", "value", "allowed", "message"],
    "properties": {
        "field": {"type": "string", "description": "dotted path of the plan field, also the form input's name"},
        "label": {"type": "string"},
        "value": {"description": "the value sent (long values shortened)"},
        "allowed": {"type": "object", "description": "min / max / unit, choices, or lengths"},
        "message": {"type": "string"},
    },
}
ENVELOPE_SCHEMA: dict[str, Any] = {
    "type": "object",
    "required": ["status", "problems"],
    "properties": {
        "status": {"type": "integer"},
        "problems": {"type": "array", "items": {"$ref": "#/components/schemas/Problem"}},
    },
}


def _envelope(description: str) -> dict[str, Any]:
    return {
        "description": description,
        "content": {"application/json": {"schema": {"$ref": "#/components/schemas/ErrorEnvelope"}}},
    }


REFUSALS: dict[str, Any] = {
    "413": _envelope("The body is larger than the server accepts."),
    "415": _envelope("The body is not sent as application/json."),
    "422": _envelope("The plan is invalid, or too costly to check: every problem names field, value and range."),
}
PLAN_BODY: dict[str, Any] = {
    "requestBody": {
        "required": True,
        "content": {"application/json": {"schema": {"$ref": "#/components/schemas/BusPlan"}}},
    },
    "responses": REFUSALS,
}
CHECK_BODY: dict[str, Any] = {
    "requestBody": {
        "required": True,
        "content": {
            "application/json": {
                "schema": {
                    "oneOf": [
                        {"$ref": "#/components/schemas/BusPlan"},
                        {
                            "type": "object",
                            "description": "the editor's typed fields, as its live verdict sends them",
                            "required": ["form"],
                            "additionalProperties": False,
                            "properties": {"form": {"type": "object", "additionalProperties": {"type": "string"}}},
                        },
                    ]
                }
            }
        },
    },
    "responses": REFUSALS,
}
SAVE_BODY: dict[str, Any] = PLAN_BODY | {
    "responses": REFUSALS | {"429": _envelope("Too many saves from this address; see Retry-After.")}
}
FORM_BODY: dict[str, Any] = {
    "requestBody": {
        "required": True,
        "content": {
            "application/x-www-form-urlencoded": {
                "schema": {
                    "type": "object",
                    "description": "the editor's inputs, named by plan path (nodes.2.stub_length_m), as typed",
                    "additionalProperties": {"type": "string"},
                }
            }
        },
    }
}


def multipart_body(properties: dict[str, Any]) -> dict[str, Any]:
    """A form with a file upload among its fields, as an operation's requestBody."""
    schema = {"type": "object", "properties": properties}
    return {"requestBody": {"required": True, "content": {"multipart/form-data": {"schema": schema}}}}


IMPORT_BODY = multipart_body({"plan_file": {"type": "string", "format": "binary"}, "plan_text": {"type": "string"}})


def plan_openapi(app: FastAPI) -> dict[str, Any]:
    """The app's OpenAPI document with the plan, problem and envelope schemas among its components."""
    if app.openapi_schema is None:
        doc = get_openapi(title=app.title, version=app.version, routes=app.routes, description=DESCRIPTION)
        plan = BusPlan.model_json_schema(ref_template=_REF)
        schemas = doc.setdefault("components", {}).setdefault("schemas", {})
        schemas.update(plan.pop("$defs", {}))
        schemas.update(BusPlan=plan, Problem=PROBLEM_SCHEMA, ErrorEnvelope=ENVELOPE_SCHEMA)
        app.openapi_schema = doc
    return app.openapi_schema
