"""The Jinja environment and the one `render()` every page goes through.

Links in pages are relative to the site, or absolute from the configured public base URL; the request's Host
header never goes into a page.
"""

import json
from dataclasses import dataclass
from typing import Any

from fastapi import Request
from fastapi.responses import HTMLResponse
from jinja2 import Environment, FileSystemLoader, select_autoescape
from pairline.engine import ENGINE_VERSION

from pairline import data_dir

TEMPLATES_DIR = data_dir("templates")


def make_templates() -> Environment:
    env = Environment(
        loader=FileSystemLoader(TEMPLATES_DIR),
        autoescape=select_autoescape(enabled_extensions=("html", "svg"), default=True),
        trim_blocks=True,
        lstrip_blocks=True,
    )
    env.globals["engine_version"] = ENGINE_VERSION
    return env


@dataclass(frozen=True, slots=True)
class PageAt:
    """Where a page is served: everything besides its data that its bytes depend on."""

    path: str
    base_url: str  # the configured public base URL, or "" for links relative to the site


def page_at(request: Request) -> PageAt:
    return PageAt(request.url.path, request.app.state.settings.public_base_url or "")


def render_page(env: Environment, template: str, data: dict[str, Any], at: PageAt) -> bytes:
    """The page as UTF-8 bytes."""
    json_url = at.path + ".json" if at.path != "/" else "/index.json"
    html = env.get_template(template).render(data=data, request_path=at.path, json_url=json_url, base_url=at.base_url)
    return html.encode("utf-8")


def render_bytes(request: Request, template: str, data: dict[str, Any]) -> bytes:
    return render_page(request.app.state.templates, template, data, page_at(request))


def page_json(data: dict[str, Any]) -> bytes:
    """Page data as the JSON twin sends it (the same separators and escaping as JSONResponse)."""
    return json.dumps(data, ensure_ascii=False, allow_nan=False, indent=None, separators=(",", ":")).encode("utf-8")


def render(request: Request, template: str, data: dict[str, Any], status_code: int = 200) -> HTMLResponse:
    return HTMLResponse(render_bytes(request, template, data), status_code=status_code)


def page_template(data: dict[str, Any]) -> str:
    """The template of a checked plan's page: one bus, or a plan of several parts."""
    return "network.html" if data.get("page") == "network" else "plan.html"
