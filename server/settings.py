"""Server settings: how checks are bounded, cached and rate-limited, and where links point.

Every value has a default that suits one small machine; `settings_from_env` reads PAIRLINE_* variables over
the defaults, and refuses a bad value by naming the variable, what it held and the allowed range.
"""

import os
from collections.abc import Mapping
from dataclasses import dataclass, fields
from urllib.parse import urlsplit


@dataclass(frozen=True, slots=True)
class Settings:
    # Links in pages are built from this ("https://plans.example.org"), never from the request's Host header;
    # None keeps every link relative to the page.
    public_base_url: str | None = None
    check_workers: int = 2  # worker processes that run checks; requests never simulate on the event loop
    check_time_limit_s: float = 30.0  # per check; a plan estimated to need longer is refused before it starts
    check_memory_limit_mb: int = 1024  # per check, on top of what a fresh worker holds
    check_queue_limit: int = 16  # checks waiting for a worker; beyond this, 503 with Retry-After
    cache_max_mb: int = 256  # checked results kept in memory
    draft_cache_ttl_s: float = 600.0  # unsaved plans are remembered by content for this long
    saves_per_minute: int = 20  # per client address
    saves_per_day: int = 500  # per client address
    max_json_depth: int = 16  # nesting of a JSON body, checked before it is parsed (a plan needs 4)
    max_body_bytes: int = 2_000_000  # a 512-node plan is about 100 kB


# (environment variable, lowest, highest) per setting; public_base_url is checked on its own.
_ENVIRONMENT: dict[str, tuple[str, float, float]] = {
    "check_workers": ("PAIRLINE_CHECK_WORKERS", 1, 64),
    "check_time_limit_s": ("PAIRLINE_CHECK_TIME_LIMIT_S", 0.1, 3600),
    "check_memory_limit_mb": ("PAIRLINE_CHECK_MEMORY_MB", 64, 65536),
    "check_queue_limit": ("PAIRLINE_CHECK_QUEUE", 0, 10_000),
    "cache_max_mb": ("PAIRLINE_CACHE_MB", 0, 65536),
    "draft_cache_ttl_s": ("PAIRLINE_DRAFT_CACHE_S", 0, 86_400),
    "saves_per_minute": ("PAIRLINE_SAVES_PER_MINUTE", 1, 100_000),
    "saves_per_day": ("PAIRLINE_SAVES_PER_DAY", 1, 10_000_000),
    "max_json_depth": ("PAIRLINE_MAX_JSON_DEPTH", 4, 1000),
    "max_body_bytes": ("PAIRLINE_MAX_BODY_BYTES", 10_000, 100_000_000),
}
PUBLIC_URL_VARIABLE = "PAIRLINE_PUBLIC_URL"


def public_base_url(text: str, name: str = PUBLIC_URL_VARIABLE) -> str:
    """An absolute http(s) URL without query or fragment, with no trailing slash."""
    parts = urlsplit(text.strip())
    if parts.scheme not in ("http", "https") or not parts.netloc or parts.query or parts.fragment:
        raise ValueError(
            f"{name} is '{text}'; allowed an absolute http or https URL without query or fragment, "
            "such as https://plans.example.org"
        )
    return text.strip().rstrip("/")


def settings_from_env(environ: Mapping[str, str] | None = None) -> Settings:
    """Defaults, overridden by PAIRLINE_* variables. Raises ValueError naming a bad variable and its range."""
    env = os.environ if environ is None else environ
    values: dict[str, object] = {}
    for f in fields(Settings):
        if f.name not in _ENVIRONMENT:
            continue
        name, lowest, highest = _ENVIRONMENT[f.name]
        text = env.get(name)
        if not text:
            continue
        whole = f.type is int
        try:
            number: float = int(text) if whole else float(text)
        except ValueError:
            number = float("nan")
        if not lowest <= number <= highest:  # NaN fails too
            kind = "a whole number" if whole else "a number"
            raise ValueError(f"{name} is '{text}'; allowed {kind} from {lowest:g} to {highest:g}.")
        values[f.name] = number
    url = env.get(PUBLIC_URL_VARIABLE)
    if url:
        values["public_base_url"] = public_base_url(url)
    return Settings(**values)  # type: ignore[arg-type]
