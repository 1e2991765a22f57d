"""Values as the record prints them: times in local time with the zone stated, deliveries in
words, numbers without float noise (150.0, not 150.00000000009095)."""

from __future__ import annotations

import math
from datetime import datetime, timezone
from typing import Any

DELIVERY_WORDS = (("docket", "docket", ""), ("volume_m3", "volume", "m³"), ("slump_mm", "slump", "mm"),
                  ("batched_at", "batched", ""), ("discharged_at", "discharged", ""))


def clean_number(value: Any, digits: int = 6) -> Any:
    """A float rounded to ``digits`` decimals (drops binary noise); other values unchanged."""
    if isinstance(value, float) and math.isfinite(value):
        rounded = round(value, digits)
        return rounded + 0.0            # -0.0 -> 0.0
    return value


def plain(value: Any) -> str:
    """A value for a table cell: floats to at most 3 decimals, trailing zeros dropped."""
    if isinstance(value, float):
        return f"{value:.3f}".rstrip("0").rstrip(".")
    return "" if value is None else str(value)


def n(value: Any, digits: int = 2) -> str:
    """A number with thousands separators and fixed decimals, or an em dash when missing."""
    if value is None:
        return "—"
    try:
        return f"{float(value):,.{digits}f}"
    except (TypeError, ValueError):
        return str(value)


def zone_words(moment: datetime) -> str:
    """The zone of a local time, e.g. 'CET, UTC+01:00'."""
    offset = moment.strftime("%z")
    offset = f"UTC{offset[:3]}:{offset[3:]}" if offset else "UTC"
    name = moment.tzname() or ""
    return f"{name}, {offset}" if name and name not in offset else offset


def local_time(value: Any, with_zone: bool = True) -> str:
    """An ISO 8601 time as '3 Dec 2026 14:05 (CET, UTC+01:00)' in this machine's local zone.
    A time entered at the rig without a zone is local time as entered: it is printed as written,
    with this machine's zone stated as the one taken for it. Text that is not a time is returned
    as it is."""
    if value in (None, ""):
        return ""
    if isinstance(value, datetime):
        moment = value
    else:
        try:
            moment = datetime.fromisoformat(str(value).replace("Z", "+00:00"))
        except ValueError:
            return str(value)
    if moment.tzinfo is None:
        text = f"{moment.day} {moment:%b %Y %H:%M}"
        zone = zone_words(moment.astimezone())
        return f"{text} (local as entered, {zone})" if with_zone else text
    local = moment.astimezone()
    text = f"{local.day} {local:%b %Y %H:%M}"
    return f"{text} ({zone_words(local)})" if with_zone else text


def now_local() -> datetime:
    return datetime.now(timezone.utc).astimezone()


def delivery_words(delivery: dict) -> str:
    """'docket 4471, volume 6 m³, slump 120 mm, batched 3 Dec 2026 09:10 (...)'."""
    parts = []
    for key, word, unit in DELIVERY_WORDS:
        if key not in delivery:
            continue
        value = delivery[key]
        text = local_time(value) if key.endswith("_at") else plain(value)
        parts.append(f"{word} {text}{' ' + unit if unit else ''}")
    for key in sorted(set(delivery) - {k for k, _, _ in DELIVERY_WORDS}):
        parts.append(f"{key.replace('_', ' ')} {plain(delivery[key])}")
    return ", ".join(parts)
