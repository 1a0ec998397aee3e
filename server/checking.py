"""Checked-plan data for pages: from the results cache, else from a check worker, each check bounded.

A saved plan never changes, so its checked data is cached by plan id, engine version and view options for as
long as the cache keeps it; an unsaved plan (a draft from the editor or `POST /api/check`) is cached by the
hash of its content for `draft_cache_ttl_s`. Values are bytes: the page data as JSON, exactly the bytes the
`.json` twin answers with, and a saved plan's page as HTML, rendered by the worker that checked it; so a cache
hit returns identical bytes and costs the server nothing but the copy. One check runs per key at a time: a
second request for the same plan waits for the first rather than simulating it again.

A capture checked against a saved plan never changes either: its result page and JSON twin are cached by capture
id and engine version, kept as soon as the capture is saved.

A plan whose estimated check time is over the limit is refused before simulating (server.cost); one that runs
past the limit or out of memory is refused the same way, and for a saved plan that refusal is cached too, so
a shared link to it does not cost a worker a full time limit on every view.
"""

import hashlib
import json
import threading
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from dataclasses import asdict
from typing import Any

from pairline.engine import ENGINE_VERSION
from pairline.engine.plan import BusInputError, BusPlan, Problem, plan_to_dict
from pairline.server.cache import ResultCache
from pairline.server.cost import cost_problems, over_limit_problems
from pairline.server.jobs import Page, advised_editor, checked_plan_page, checked_report, templates
from pairline.server.rendering import PageAt, page_template, render_page
from pairline.server.settings import Settings
from pairline.server.store import SavedPlan, canonical_json
from pairline.server.workers import CheckOverLimit, CheckPool

REFUSAL_TTL_S = 3600.0  # a saved plan's over-limit refusal is retried after this (settings may have changed)
_CHECKED = b"checked\n"
_REFUSED = b"refused\n"
Job = tuple[Callable[..., Page], tuple[Any, ...]]


class CheckRefused(BusInputError):
    """The plan is too costly to check within the limits; its problems say what makes it costly (a 422)."""


def saved_key(plan_id: str, receiver: str | None) -> str:
    return f"saved:{plan_id}:{ENGINE_VERSION}:{receiver or ''}"


def capture_key(capture_id: str) -> str:
    return f"capture:{capture_id}:{ENGINE_VERSION}"


def html_key(key: str) -> str:
    return "html:" + key


def draft_key(plan: BusPlan, view: str) -> str:
    digest = hashlib.sha256(canonical_json(plan_to_dict(plan)).encode("utf-8")).hexdigest()
    return f"draft-{view}:{digest}:{ENGINE_VERSION}"


class Checker:
    """Page data for saved plans and drafts, through the cache and the worker pool."""

    def __init__(self, pool: CheckPool, cache: ResultCache, settings: Settings):
        self.pool = pool
        self.cache = cache
        self.settings = settings
        self._guard = threading.Lock()
        self._running: dict[str, threading.Lock] = {}

    def cached_json(self, plan_id: str, receiver: str | None) -> bytes | None:
        """A saved plan's JSON twin when the cache holds it (a refusal is not returned here)."""
        found = self.cache.get(saved_key(plan_id, receiver))
        return found[len(_CHECKED) :] if found is not None and found.startswith(_CHECKED) else None

    def cached_html(self, plan_id: str, receiver: str | None) -> bytes | None:
        return self.cache.get(html_key(saved_key(plan_id, receiver)))

    def saved_json(self, saved: SavedPlan, plan: BusPlan, receiver: str | None, extra: dict[str, Any]) -> bytes:
        """A saved plan's JSON twin; `receiver` must be one of its receivers or None. `extra` joins the data when
        it is checked (facts about the saved row that never change, such as its parent)."""
        job = (checked_plan_page, (plan_to_dict(plan), saved, receiver, extra, None))
        return self._data(saved_key(saved.id, receiver), None, REFUSAL_TTL_S, plan, job)[0]

    def saved_html(
        self, saved: SavedPlan, plan: BusPlan, receiver: str | None, extra: dict[str, Any], at: PageAt
    ) -> bytes:
        """A saved plan's page: rendered by the worker that checks it, or from the checked data in the cache."""
        key = saved_key(saved.id, receiver)
        found = self.cache.get(html_key(key))
        if found is None:
            job = (checked_plan_page, (plan_to_dict(plan), saved, receiver, extra, at))
            body, found = self._data(key, None, REFUSAL_TTL_S, plan, job)
            if found is None:  # checked earlier, for its JSON twin
                data = json.loads(body)
                found = render_page(templates(), page_template(data), data, at)
                self.cache.put(html_key(key), found)
        return found

    def draft_data(self, plan: BusPlan) -> bytes:
        """JSON bytes of an unsaved plan's page data (no id, no URL)."""
        ttl = self.settings.draft_cache_ttl_s
        job = (checked_plan_page, (plan_to_dict(plan), None, None, {}, None))
        return self._data(draft_key(plan, "page"), ttl, ttl, plan, job)[0]

    def draft_report(self, plan: BusPlan) -> bytes:
        """JSON bytes of an unsaved plan's verdict, findings and summary, without simulated pictures."""
        ttl = self.settings.draft_cache_ttl_s
        return self._data(draft_key(plan, "report"), ttl, ttl, plan, (checked_report, (plan_to_dict(plan),)))[0]

    def advised_editor(self, plan: BusPlan, saved: SavedPlan | None, parent_id: str | None) -> bytes:
        """JSON bytes of the editor opened on a plan's advised plan (a saved plan's is kept as long as its page)."""
        job = (advised_editor, (plan_to_dict(plan), saved, parent_id))
        if saved is not None:
            return self._data(f"advised:{saved.id}:{ENGINE_VERSION}", None, REFUSAL_TTL_S, plan, job)[0]
        ttl = self.settings.draft_cache_ttl_s
        return self._data(draft_key(plan, f"advised:{parent_id or ''}"), ttl, ttl, plan, job)[0]

    def keep_capture(self, capture_id: str, page: Page) -> None:
        """Cache a saved capture's JSON twin and page, just made."""
        key = capture_key(capture_id)
        self.cache.put(key, page[0])
        if page[1] is not None:
            self.cache.put(html_key(key), page[1])

    def capture_page(self, capture_id: str, make: Callable[[], Page]) -> Page:
        """A saved capture's JSON twin and page: from the cache, else made by `make` (one at a time per capture)
        and kept."""
        key = capture_key(capture_id)
        with self._one_at_a_time(key):
            body, html = self.cache.get(key), self.cache.get(html_key(key))
            if body is None or html is None:
                body, html = make()
                self.keep_capture(capture_id, (body, html))
        return body, html

    def _data(self, key: str, ttl_s: float | None, refusal_ttl_s: float, plan: BusPlan, job: Job) -> Page:
        """The JSON under key, checked by job when absent (one check per key at a time), and the HTML that check
        rendered (None when the JSON came from the cache). Raises CheckRefused."""
        found, html = self.cache.get(key), None
        if found is None:
            with self._one_at_a_time(key):
                found = self.cache.get(key)
                if found is None:
                    found, html = self._check(plan, job)
                    self.cache.put(key, found, ttl_s if found.startswith(_CHECKED) else refusal_ttl_s)
                    if html is not None:
                        self.cache.put(html_key(key), html, ttl_s)
        if found.startswith(_REFUSED):
            problems = [Problem(**p) for p in json.loads(found[len(_REFUSED) :])]
            raise CheckRefused(problems)
        return found[len(_CHECKED) :], html

    def _check(self, plan: BusPlan, job: Job) -> Page:
        """The cache entry for a plan (the job's JSON, or the refusal of a check that went over a limit) and the
        job's HTML. A plan estimated over the limit raises CheckRefused at once (cheap to tell again, so not
        cached)."""
        problems = cost_problems(plan, self.settings.check_time_limit_s)
        if problems:
            raise CheckRefused(problems)
        function, args = job
        try:
            body, html = self.pool.run(function, *args)
        except CheckOverLimit as exc:
            problems = over_limit_problems(plan, exc.limit, exc.time_limit_s, exc.memory_limit_mb)
            return _REFUSED + json.dumps([asdict(p) for p in problems], ensure_ascii=False).encode("utf-8"), None
        return _CHECKED + body, html

    @contextmanager
    def _one_at_a_time(self, key: str) -> Iterator[None]:
        with self._guard:
            lock = self._running.setdefault(key, threading.Lock())
        try:
            with lock:
                yield
        finally:
            with self._guard:
                if self._running.get(key) is lock and not lock.locked():
                    del self._running[key]
