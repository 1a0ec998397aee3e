"""The Jinja environment and the one `render()` every page goes through.

Links in pages are relative to the site, or absolute from the configured public base URL; the request's Host
header never goes into a page.
"""

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


def render_bytes(request: Request, template: str, data: dict[str, Any]) -> bytes:
    """The page as UTF-8 bytes; depends only on the template, the data, the path and the settings."""
    env: Environment = request.app.state.templates
    path = request.url.path
    json_url = path + ".json" if path != "/" else "/index.json"
    base = request.app.state.settings.public_base_url or ""
    html = env.get_template(template).render(data=data, request_path=path, json_url=json_url, base_url=base)
    return html.encode("utf-8")


def render(request: Request, template: str, data: dict[str, Any], status_code: int = 200) -> HTMLResponse:
    return HTMLResponse(render_bytes(request, template, data), status_code=status_code)
