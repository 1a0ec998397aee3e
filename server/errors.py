"""Error replies: the JSON 422 envelope built from engine problems, and the 404 page or its JSON twin."""

from dataclasses import asdict
from typing import Any

from fastapi import Request
from fastapi.responses import JSONResponse, Response
from pairline.engine.plan import BusInputError, Problem


def error_envelope(problems: list[Problem]) -> dict[str, Any]:
    """The one JSON shape for bad input: status 422 and every problem with field, value and allowed range."""
    from pairline.server.views import json_safe

    return {"status": 422, "problems": [json_safe(asdict(p)) for p in problems]}


def input_error_response(exc: BusInputError) -> JSONResponse:
    return JSONResponse(error_envelope(exc.problems), status_code=422)


def not_found(request: Request) -> Response:
    """404: JSON for `.json` and `/api/` paths, otherwise the page that says where to go instead."""
    from pairline.server.app import render
    from pairline.server.views import not_found_data

    path = request.url.path
    if path.endswith(".json") or path.startswith("/api/"):
        return JSONResponse({"status": 404, "message": f"Nothing at {path}."}, status_code=404)
    return render(request, "not_found.html", not_found_data(path), status_code=404)
