"""The store interface: what the server asks of a database, whichever database it is.

Saved plans are immutable rows keyed by a random id, each with its parent, the engine version it was saved with,
the client address that saved it and its size. Editing saves a new row whose `parent_id` names the plan it came
from, so a shared URL always shows exactly what was shared. Results are not stored with the plan: they are
recomputed on view, and may be kept a while in the results cache, which every process using the store sees.

A scope capture checked against a saved plan is stored the same way: immutable, under its own random id, beside
the plan it was held against, as the file's text and the settings it was read with (never the fit's result).
"""

import json
import secrets
from abc import ABC, abstractmethod
from dataclasses import dataclass
from datetime import datetime
from typing import Any
from urllib.parse import urlsplit, urlunsplit

# 12 random bytes = 96 bits, written as 16 URL-safe characters; at least 64 bits keeps a link unguessable.
ID_BYTES = 12
ID_CHARS = 16


@dataclass(frozen=True, slots=True)
class SavedPlan:
    id: str
    plan: dict[str, Any]
    title: str
    parent_id: str | None
    engine_version: str  # the engine version current when the plan was saved
    created_at: str  # ISO 8601, UTC, to the second


@dataclass(frozen=True, slots=True)
class SavedCapture:
    id: str
    plan_id: str  # the saved plan it was held against
    capture: dict[str, Any]  # the capture file's text (capture_csv) and the settings it was read with
    engine_version: str
    created_at: str  # ISO 8601, UTC, to the second


@dataclass(frozen=True, slots=True)
class CaptureEntry:
    """A saved capture as a plan's list shows it: without its file."""

    id: str
    plan_id: str
    at: str | None  # where it was probed: a node's or the driver's name, or None for the driver or a trunk point
    at_position_m: float | None  # or the point on the trunk
    created_at: str  # ISO 8601, UTC, to the second


@dataclass(frozen=True, slots=True)
class SampleEntry:
    slug: str
    plan_id: str
    title: str


@dataclass(frozen=True, slots=True)
class SaveCount:
    """How much one client saved in a time window: the number of plans and captures, their stored size, the first
    save."""

    saves: int
    stored_bytes: int  # UTF-8 bytes of the stored plan and capture documents
    first_at: datetime | None = None  # the earliest save in the window; None when there is none


def new_plan_id() -> str:
    """A random share id, of a plan or a capture: 96 bits from the OS's secure generator, not derived from any
    other id."""
    return secrets.token_urlsafe(ID_BYTES)


def looks_like_plan_id(text: str) -> bool:
    return len(text) == ID_CHARS and all(c.isalnum() or c in "-_" for c in text)


def canonical_json(plan: dict[str, Any]) -> str:
    return json.dumps(plan, sort_keys=True, ensure_ascii=False, separators=(",", ":"))


def target_for_people(target: str) -> str:
    """A store target fit to print or log: a database URL's password replaced by ***."""
    parts = urlsplit(target)
    if "://" not in target or parts.password is None:
        return target
    user, host = parts.netloc.rsplit("@", 1)
    return urlunsplit(parts._replace(netloc=f"{user.split(':', 1)[0]}:***@{host}"))


class StoreError(RuntimeError):
    """The database cannot be used: unreachable, refused, or written by a newer Pairline."""


class PlanStore(ABC):
    """Saved plans and their captures, the sample list, per-client save counts and a shared results cache.

    Every method is safe to call from several threads, and from several processes sharing one database.
    """

    # True for a database meant for several server processes or hosts at once (PostgreSQL): the server then keeps
    # its results cache and save counts in the store, where every process sees them, instead of in its memory.
    shared: bool = False

    @property
    @abstractmethod
    def target(self) -> str:
        """Where the plans live, for people: a file path, or a database URL without its password."""

    @abstractmethod
    def schema_version(self) -> int:
        """The newest schema migration applied to the database."""

    @abstractmethod
    def save_plan(
        self, plan: dict[str, Any], *, engine_version: str, parent_id: str | None = None, client: str | None = None
    ) -> str:
        """Store a validated plan document and return its new id. `client` is the address that saved it."""

    @abstractmethod
    def get_plan(self, plan_id: str) -> SavedPlan | None:
        """The saved plan, or None for an unknown or malformed id."""

    @abstractmethod
    def children_of(self, plan_id: str) -> list[str]:
        """Ids of the plans saved as edited copies of `plan_id`, oldest first."""

    @abstractmethod
    def save_capture(
        self, plan_id: str, capture: dict[str, Any], *, engine_version: str, client: str | None = None
    ) -> str:
        """Store a capture held against the saved plan `plan_id` and return its new id."""

    @abstractmethod
    def get_capture(self, plan_id: str, capture_id: str) -> SavedCapture | None:
        """The capture saved against `plan_id`, or None for an unknown id or one saved against another plan."""

    @abstractmethod
    def captures_of(self, plan_id: str, limit: int) -> tuple[list[CaptureEntry], int]:
        """The newest `limit` captures saved against `plan_id`, newest first, and how many it has in all."""

    @abstractmethod
    def saves_since(self, client: str, since: datetime) -> SaveCount:
        """How many plans and captures `client` saved at or after `since` (timezone-aware), their bytes and the
        first one's time."""

    @abstractmethod
    def put_sample(self, slug: str, plan: dict[str, Any], *, engine_version: str, position: int) -> str:
        """Make the sample `slug` point at a saved copy of `plan`. An unchanged sample keeps its id, so links
        to it survive restarts; a changed sample file gets a new id (the old one still opens)."""

    @abstractmethod
    def retain_samples(self, slugs: list[str]) -> None:
        """Forget samples not in `slugs` (their saved plans stay reachable by id)."""

    @abstractmethod
    def samples(self) -> list[SampleEntry]:
        """The sample list in its stored order."""

    @abstractmethod
    def cache_get(self, key: str) -> bytes | None:
        """The cached value under `key`, or None when absent or expired."""

    @abstractmethod
    def cache_put(self, key: str, value: bytes, *, ttl_s: float | None = None) -> None:
        """Cache `value` under `key`, replacing any earlier one; it expires `ttl_s` seconds from now, or never."""

    @abstractmethod
    def close(self) -> None:
        """Release connections; the store is not used afterwards."""
