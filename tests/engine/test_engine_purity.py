"""The engine knows nothing about the web: no web, template, server or database module is imported."""

import ast
from pathlib import Path

import pytest

ENGINE = Path(__file__).resolve().parents[2] / "engine"
FORBIDDEN = {"fastapi", "starlette", "jinja2", "uvicorn", "sqlite3", "psycopg", "psycopg_pool", "httpx", "multipart"}
FORBIDDEN_PACKAGES = ("pairline.server",)
ENGINE_FILES = sorted(ENGINE.rglob("*.py"))


def _imported_modules(path: Path) -> set[str]:
    modules: set[str] = set()
    for node in ast.walk(ast.parse(path.read_text(), filename=str(path))):
        if isinstance(node, ast.Import):
            modules.update(alias.name for alias in node.names)
        elif isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
            modules.add(node.module)
    return modules


def _imported_roots(path: Path) -> set[str]:
    return {module.split(".")[0] for module in _imported_modules(path)}


def test_engine_has_modules():
    assert len(ENGINE_FILES) >= 5


@pytest.mark.parametrize("path", ENGINE_FILES, ids=lambda p: str(p.relative_to(ENGINE)))
def test_engine_module_imports_no_web_or_database(path: Path):
    assert _imported_roots(path).isdisjoint(FORBIDDEN)
    assert not [m for m in _imported_modules(path) if m.startswith(FORBIDDEN_PACKAGES)]


@pytest.mark.parametrize("path", ENGINE_FILES, ids=lambda p: str(p.relative_to(ENGINE)))
def test_only_the_plan_module_imports_pydantic(path: Path):
    if path.name != "plan.py":
        assert "pydantic" not in _imported_roots(path)
