"""Error replies: the JSON envelope built from problems, and the same errors as pages for browsers.

Every refusal names the field, the value and the allowed range. JSON for `/api/` and `.json` paths and for
clients that do not ask for HTML; a page otherwise.
"""

from dataclasses import asdict
from typing import Any

from fastapi import Request
from fastapi.responses import JSONResponse, Response
from pairline.engine.plan import BusInputError, Problem
from pairline.server.rendering import render
from pairline.server.views import json_safe, not_found_data

ERROR_TITLES = {
    413: "That is too much to send",
    415: "Send the plan as JSON",
    429: "Too many saves for now",
    503: "The planner is busy",
}


class RequestRefused(Exception):
    """A request refused for a reason other than the plan's values (size, media type, quota, load)."""

    def __init__(self, status: int, problem: Problem, retry_after_s: float | None = None):
        self.status = status
        self.problem = problem
        self.retry_after_s = retry_after_s
        super().__init__(problem.message)


def error_envelope(problems: list[Problem], status: int = 422) -> dict[str, Any]:
    """The one JSON shape for a refusal: the status and every problem with field, value and allowed range."""
    return {"status": status, "problems": [json_safe(asdict(p)) for p in problems]}


def input_error_response(exc: BusInputError) -> JSONResponse:
    return JSONResponse(error_envelope(exc.problems), status_code=422)


def wants_page(request: Request) -> bool:
    path = request.url.path
    api = path.startswith("/api/") or path.endswith(".json") or path == "/openapi.json"
    return not api and "text/html" in request.headers.get("accept", "")


def refused_response(request: Request, exc: RequestRefused) -> Response:
    headers = {"Retry-After": str(round(exc.retry_after_s))} if exc.retry_after_s is not None else None
    if wants_page(request):
        data = {
            "page": "error",
            "status": exc.status,
            "title": ERROR_TITLES.get(exc.status, "Request refused"),
            "message": exc.problem.message,
        }
        page = render(request, "error.html", data, status_code=exc.status)
        page.headers.update(headers or {})
        return page
    return JSONResponse(error_envelope([exc.problem], exc.status), status_code=exc.status, headers=headers)


def not_found(request: Request) -> Response:
    """404: JSON for `.json` and `/api/` paths, otherwise the page that says where to go instead."""
    path = request.url.path
    if path.endswith(".json") or path.startswith("/api/"):
        return JSONResponse({"status": 404, "message": f"Nothing at {path}."}, status_code=404)
    return render(request, "not_found.html", not_found_data(path), status_code=404)
