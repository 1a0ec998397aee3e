"""Page data of field checks: the capture form (with what was typed and every message beside its input) and
the result page, each one plain dict rendered by its template or returned as its JSON twin. A saved capture's
page is the result page with its link, its save time and its file to download.

A saved plan's page lists the captures saved with it. Its checked part never changes and is cached; the list
grows with every capture, so it is never cached with it: each view reads the list from the store and fills it
into the cached page's slot, and into its JSON twin as `captures`.
"""

import json
from typing import Any

from jinja2 import Environment
from pairline.engine import ENGINE_VERSION
from pairline.engine.capture import TIME_UNITS, VOLTAGE_UNITS
from pairline.engine.fieldcheck import REGIONS, FieldCheck
from pairline.engine.plan import BusPlan, Problem
from pairline.engine.units import si_format
from pairline.server.field import FIELD_KEYS, FieldRequest, field_data
from pairline.server.fieldplot import overlay_plot
from pairline.server.jobs import Page
from pairline.server.quantities import UnitSystem, length_text, length_unit, number_text
from pairline.server.rendering import PageAt, page_json, render_page
from pairline.server.store import CaptureEntry, SavedCapture
from pairline.server.views import json_safe
from pairline.server.wording import counted, date_text

REGION_LABELS = {"edge": "First edge", "reflections": "Reflections", "settled": "Settled level"}
SENT_CHOICES = (("edge", "one edge"), ("pattern", "the plan's bit pattern"), ("bits", "the bits typed beside"))
SIGNAL_CHOICES = (("auto", "by the number of columns"), ("differential", "A-B"), ("lines", "A and B to ground"))
CAPTURE_LIST_LIMIT = 50  # captures a plan's page lists, newest first; the rest are counted
CAPTURE_LIST_SLOT = b"<!--capture-list-->"  # where plan.html leaves room for the list


def _unit_choices(table: dict[str, float], what: str) -> tuple[tuple[str, str], ...]:
    seen = dict.fromkeys(k for k in table if k.isascii() and k not in ("sec", "volt", "volts"))
    return (("", f"from the file ({what})"), *((k, k) for k in seen))


def form_meta(plan: BusPlan) -> dict[str, dict[str, Any]]:
    """Label, unit, hint and choices of every input, by its name."""
    units: UnitSystem = plan.display_units
    places = [(plan.driver.name, f"{plan.driver.name} (the driver's terminal)")]
    places += [(n.name, n.name) for n in plan.nodes]
    places.append(("", "a point on the trunk (position below)"))
    return {
        "at": {"label": "Probe at", "choices": places},
        "at_position_m": {
            "label": "Position on the trunk",
            "unit": length_unit(units),
            "hint": "only for a point on the trunk: a junction or a box with no device",
        },
        "sent": {"label": "What the driver sent", "choices": list(SENT_CHOICES)},
        "bits": {"label": "Bits sent", "hint": f"0s and 1s at the plan's {si_format(plan.bit_rate_bps, 'bit/s')}"},
        "signal": {
            "label": "Voltage columns",
            "choices": list(SIGNAL_CHOICES),
            "hint": "one column is A-B, two are A and B against ground",
        },
        "time_unit": {"label": "Time unit", "choices": list(_unit_choices(TIME_UNITS, "else s"))},
        "voltage_unit": {"label": "Voltage unit", "choices": list(_unit_choices(VOLTAGE_UNITS, "else V"))},
        "sample_interval_s": {
            "label": "Sample interval",
            "unit": "ns",
            "hint": "only when the file has no time column and its header does not say, e.g. 2 ns",
        },
        "probe_attenuation": {"label": "Probe attenuation", "hint": "10 for a 10:1 probe the scope was not set for"},
    }


def field_form_data(
    plan: BusPlan,
    plan_id: str,
    values: dict[str, str] | None = None,
    problems: list[Problem] | None = None,
) -> dict[str, Any]:
    """The capture form for a saved plan: defaults, or what was typed with each problem beside its input."""
    shown = {"at": plan.driver.name, "sent": "edge", "signal": "auto", "probe_attenuation": "1"} | (values or {})
    return {
        "page": "field",
        "title": f"Check a capture against “{plan.title or 'Untitled bus'}”",
        "plan_id": plan_id,
        "plan_url": f"/plans/{plan_id}",
        "action": f"/plans/{plan_id}/field",
        "values": {k: shown.get(k, "") for k in (*FIELD_KEYS, "capture_csv")},
        "errors": {p.field: p.message for p in problems or []},
        "problems": [{"field": p.field, "label": p.label, "message": p.message} for p in problems or []],
        "meta": form_meta(plan),
    }


def field_result_data(plan: BusPlan, plan_id: str | None, request: FieldRequest, result: FieldCheck) -> dict[str, Any]:
    """The result page: the field_data JSON plus what the page shows (texts, the overlay's coordinates)."""
    units: UnitSystem = plan.display_units
    data = field_data(result, request)
    o = result.overlay
    swing = float(o.predicted_v.max() - o.predicted_v.min()) or 1.0
    rows = []
    for plan_r, fit_r in zip(result.residuals, result.fitted_residuals, strict=True):
        rows.append(
            {
                "region": plan_r.region,
                "label": REGION_LABELS[plan_r.region],
                "samples": plan_r.samples,
                "plan_text": f"{si_format(plan_r.rms_v, 'V')} ({number_text(100 * plan_r.rms_fraction, 2)} %)",
                "plan_max_text": si_format(plan_r.max_abs_v, "V"),
                "fitted_text": f"{si_format(fit_r.rms_v, 'V')} ({number_text(100 * fit_r.rms_fraction, 2)} %)",
                "fitted_max_text": si_format(fit_r.max_abs_v, "V"),
            }
        )
    quantities = [
        {
            "label": q.label,
            "planned_text": _value_text(q.planned, q.unit, units, "none"),
            "fitted_text": _value_text(q.fitted, q.unit, units, "none (missing)"),
            "range_text": f"{_value_text(q.low, q.unit, units, '?')} to {_value_text(q.high, q.unit, units, 'open')}",
            "differs": q.differs,
        }
        for q in result.quantities
    ]
    a = result.alignment
    return data | {
        "page": "field-result",
        "title": f"Field check of “{plan.title or 'Untitled bus'}”",
        "plan_id": plan_id,
        "plan_url": f"/plans/{plan_id}" if plan_id else None,
        "probe_text": probe_text(request.at, request.at_position_m, plan.driver.name, units),
        "sent_text": _sent_text(result),
        "capture_text": (
            f"{result.samples} samples every {si_format(result.sample_interval_s, 's')} "
            f"({'A and B' if result.signal == 'lines' else 'A-B'}), noise about {si_format(result.noise_v, 'V')}"
        ),
        "alignment_text": (
            f"The driver starts sending {si_format(a.time_offset_s, 's')} into the capture; the plan's levels were "
            f"scaled by {number_text(a.scale)} and moved by {si_format(a.level_offset_v, 'V')} to lie over it"
            + (" (the capture is shown upside down)." if a.inverted else ".")
        ),
        "swing_text": si_format(swing, "V"),
        "residual_rows": rows,
        "quantity_rows": quantities,
        "svg": json_safe(overlay_plot(o.time_s, o.measured_v, o.predicted_v, o.fitted_v, o.region, REGIONS)),
        "draft_json": None if data["fitted_plan"] is None else json.dumps(data["fitted_plan"]),
    }


def field_json(page: dict[str, Any]) -> dict[str, Any]:
    """The JSON twin of a result page: everything but what only the drawing needs."""
    return {k: v for k, v in page.items() if k not in ("svg", "draft_json")}


def capture_url(plan_id: str, capture_id: str) -> str:
    return f"/plans/{plan_id}/captures/{capture_id}"


def saved_capture_data(saved: SavedCapture) -> dict[str, Any]:
    """A saved capture's link, its JSON twin and file, and when and with which engine it was saved."""
    url = capture_url(saved.plan_id, saved.id)
    return {
        "id": saved.id,
        "url": url,
        "json_url": url + ".json",
        "csv_url": url + ".csv",
        "created_at": saved.created_at,
        "created_text": date_text(saved.created_at),
        "saved_with_engine": saved.engine_version,
        "checked_with_engine": ENGINE_VERSION,
    }


def capture_list_data(
    plan_id: str, entries: list[CaptureEntry], total: int, plan_doc: dict[str, Any]
) -> dict[str, Any]:
    """The captures saved with a plan as its page lists them: the newest (store.captures_of), each with its save
    time, where it was probed (in the units and names of `plan_doc`, the saved plan) and its link, and how many
    more there are. A capture's verdict is on its own page: telling it here would mean fitting every capture
    listed."""
    units: UnitSystem = "imperial" if plan_doc.get("display_units") == "imperial" else "metric"
    driver = plan_doc.get("driver")
    driver_name = str(driver.get("name")) if isinstance(driver, dict) else ""
    items = []
    for entry in entries:
        url = capture_url(plan_id, entry.id)
        at, position_m = entry.at, entry.at_position_m
        items.append(
            {
                "id": entry.id,
                "url": url,
                "json_url": url + ".json",
                "created_at": entry.created_at,
                "created_text": date_text(entry.created_at),
                "at": at,
                "at_position_m": position_m,
                "probe_text": probe_text(at, position_m, driver_name, units),
            }
        )
    not_listed = total - len(items)
    return {
        "note": "Anyone who has this plan's link can check a scope capture against it, and see every capture "
        "checked against it here; a saved capture never changes.",
        "caption": f"{counted(total, 'capture', 'captures')} saved with this plan, newest first",
        "listed": items,
        "total": total,
        "not_listed": not_listed,
        "not_listed_text": f"{counted(not_listed, 'older capture is', 'older captures are')} not listed here; "
        "each still opens at its own link.",
        "add_url": f"/plans/{plan_id}/field",
    }


def with_capture_list(body: bytes, as_json: bool, captures: dict[str, Any], env: Environment) -> bytes:
    """A saved plan's page, or its JSON twin, as cached, with its capture list put in (as `captures`)."""
    if as_json:  # the twin is one JSON object: the list joins it as its last member
        return body[: body.rindex(b"}")] + b',"captures":' + page_json(captures) + b"}"
    fragment = env.get_template("_partials/captures.html").render(data=captures)
    return body.replace(CAPTURE_LIST_SLOT, fragment.encode("utf-8"), 1)


def field_pages(env: Environment, result: dict[str, Any], saved: SavedCapture | None, base_url: str) -> Page:
    """The result's JSON twin, and for a saved capture its page too (rendered at its own link)."""
    if saved is None:
        return page_json(field_json(result)), None
    data = result | {"saved_capture": saved_capture_data(saved)}
    html = render_page(env, "field_result.html", data, PageAt(data["saved_capture"]["url"], base_url))
    return page_json(field_json(data)), html


def _value_text(value: float | None, unit: str, units: UnitSystem, none: str) -> str:
    if value is None:
        return none
    if unit == "m":
        return length_text(value, units)
    if unit in ("V", ""):
        return f"{number_text(value)} {unit}".strip()
    return si_format(value, unit)


def probe_text(at: str | None, at_position_m: float | None, driver_name: str, units: UnitSystem) -> str:
    """Where a capture was taken, in words: a point on the trunk, the driver's terminal, or a node."""
    if at_position_m is not None:
        return f"a point on the trunk at {length_text(at_position_m, units)}"
    at = at or driver_name
    return f"the driver's terminal ({at})" if at == driver_name else f"node '{at}'"


def _sent_text(result: FieldCheck) -> str:
    setup = result.setup
    if setup.sent == "edge":
        return "one edge"
    shown = setup.bits if len(setup.bits) <= 40 else setup.bits[:40] + "…"
    return f"{'the plan’s pattern' if setup.sent == 'pattern' else 'typed bits'} {shown} ({len(setup.bits)} bits)"
