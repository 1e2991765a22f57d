"""As-built records and photos for the demo project, made through the app's own save path.

``add_records(app, project_id, inspector_email)`` gives about half the demo piles a record
saved with ``saving.save_record`` (validation, recheck, version, audit entry: exactly what a tablet's
save does) and one or two photos through ``photos.add_photo``. Most are built as designed and
meet design; one pile each is short on:

* toe level (stopped 1.5 m above the level its load needs: axial compression and toe short),
* base debris (65 mm against the 38 mm allowed),
* cover for its exposure class (10 mm under the class minimum),
* position (150 mm off, in a cap of several piles, so the cap's shares move),
* concrete volume ratio (0.90 of the theoretical volume: possible necking),
* time from batching (a truck discharged 115 minutes after batching),

and two piles are part-way (boring, concreted). The photos are drawn with Pillow (not real
photos) and carry an EXIF capture time. Invented data only.
"""

from __future__ import annotations

import io
import math
import uuid
from datetime import datetime, timedelta

from flask import has_app_context
from PIL import Image, ImageDraw, ImageFont

from fieldapp import db, photos
from fieldapp.pile_inputs import load_ground, pile_design
from fieldapp.queries import piles as piles_q
from fieldapp.queries import projects, users
from fieldapp.queries.caps import natural_key
from fieldapp.rig_view import required_toe_for
from fieldapp.saving import save_record

NAMESPACE = uuid.UUID("7f1c2a52-3d4e-4b8a-9c61-5e0f2b7d9a10")  # fixed, so ids repeat run to run
START = datetime(2026, 3, 2, 7, 30)
SHORTS = ("toe", "debris", "cover", "position", "volume", "time", "cage")


def _client_id(*parts) -> str:
    return str(uuid.uuid5(NAMESPACE, "/".join(str(p) for p in parts)))


def _at(t: datetime) -> str:
    return t.strftime("%Y-%m-%dT%H:%M")


def record_for(pile, platform: float, rules, start: datetime, fault: str | None = None,
               need_toe: float | None = None, progress: str = "logged") -> dict:
    """A demo as-built record of ``pile`` (a PileRow): as designed, or with one ``fault``."""
    d = pile.diameter_mm / 1000.0
    toe = pile.toe_level_m - 0.15
    if fault == "toe" and need_toe is not None:
        toe = need_toe + 1.5
    depth = round(platform - toe, 2)
    casting = round(pile.cutoff_level_m + 0.3, 2)
    theoretical = math.pi * d ** 2 / 4.0 * (casting - (platform - depth))
    ratio = 0.90 if fault == "volume" else 1.12
    volume = round(theoretical * ratio, 2)
    trucks = max(1, math.ceil(volume / 8.0))
    batch = start + timedelta(minutes=150)
    deliveries = []
    for k in range(trucks):
        batched = batch + timedelta(minutes=25 * k)
        minutes = 115 if (fault == "time" and k == trucks - 1) else 40 + 5 * k
        deliveries.append({"docket": f"QF-{pile.mark}-{k + 1}", "volume_m3": round(volume / trucks, 2),
                           "batched_at": _at(batched), "discharged_at": _at(batched + timedelta(minutes=minutes)),
                           "slump_mm": 190 if pile.pile_type == "cfa" else 170})
    offset = (0.150, 0.0) if fault == "position" else (0.020, -0.015)
    cover_min = rules.min_cover_mm(pile.exposure_class)
    record = {
        "progress": progress, "rig": "Rig 2" if pile.pile_type == "cfa" else "Rig 1",
        "boring_start": _at(start), "boring_end": _at(start + timedelta(minutes=110)),
        "platform_level": platform, "measured_depth": depth, "diameter_mm": pile.diameter_mm,
        "strata": [],
    }
    if progress == "boring":
        return record
    record.update({
        "base_check": "visual" if pile.pile_type == "cfa" else "sounding",
        "debris_mm": 65.0 if fault == "debris" else (0.0 if pile.pile_type == "cfa" else 15.0),
        "cage_length": round(pile.cage_length_m - (0.8 if fault == "cage" else 0.0), 2), "cover_mm": cover_min - 10.0 if fault == "cover" else cover_min + 5.0,
        "exposure_class": pile.exposure_class, "concrete_mpa": pile.fc_mpa,
        "deliveries": deliveries, "pour_start": deliveries[0]["discharged_at"],
        "pour_end": _at(batch + timedelta(minutes=25 * (trucks - 1) + 60 + (70 if fault == "time" else 0))),
        "casting_level": casting, "concrete_volume_m3": volume,
    })
    if progress == "concreted":
        return record
    record.update({
        "cutoff_level": pile.cutoff_level_m + 0.01,
        "easting": round(pile.easting_m + offset[0], 3), "northing": round(pile.northing_m + offset[1], 3),
        "inclination": 0.006,
        "notes": ("CFA: no open base; concrete pumped through the auger as it was withdrawn."
                  if pile.pile_type == "cfa" else "Base sounded clean; dry bore."),
    })
    return record


def drawn_photo(mark: str, kind: str, taken: datetime) -> bytes:
    """A drawing standing in for a site photo of ``kind``, as a JPEG with an EXIF capture time."""
    w, h = 960, 720
    ground = {"base": (92, 74, 56), "cage": (110, 96, 80), "pour": (120, 120, 118),
              "finished": (150, 148, 140), "other": (100, 110, 90)}[kind]
    image = Image.new("RGB", (w, h), ground)
    draw = ImageDraw.Draw(image)
    cx, cy, r = w // 2, h // 2 + 30, 230
    if kind == "base":
        draw.ellipse((cx - r, cy - r, cx + r, cy + r), fill=(45, 35, 28), outline=(20, 20, 20), width=10)
        draw.ellipse((cx - r + 60, cy - r + 60, cx + r - 60, cy + r - 60), fill=(70, 58, 44))
    elif kind == "cage":
        for k in range(12):
            a = 2 * math.pi * k / 12
            x = cx + int(r * math.cos(a))
            draw.line((x, 90, x, h - 40), fill=(60, 40, 30), width=9)
        for y in range(120, h - 40, 70):
            draw.line((cx - r, y, cx + r, y), fill=(80, 50, 35), width=6)
    elif kind == "pour":
        draw.ellipse((cx - r, cy - r, cx + r, cy + r), fill=(150, 150, 148), outline=(30, 30, 30), width=10)
        draw.rectangle((cx - 40, 40, cx + 40, cy), fill=(40, 40, 40))
    else:
        draw.ellipse((cx - r, cy - r, cx + r, cy + r), fill=(185, 184, 178), outline=(60, 60, 60), width=8)
    font = ImageFont.load_default()
    draw.rectangle((0, 0, w, 44), fill=(255, 255, 255))
    draw.text((12, 14), f"{mark} - {kind} - {taken:%Y-%m-%d %H:%M} - drawn demo image", fill=(0, 0, 0), font=font)
    exif = Image.Exif()
    exif.get_ifd(0x8769)[0x9003] = taken.strftime("%Y:%m:%d %H:%M:%S")  # DateTimeOriginal
    out = io.BytesIO()
    image.save(out, "JPEG", quality=82, exif=exif.tobytes())
    return out.getvalue()


def add_records(app, project_id: int, inspector_email: str) -> dict:
    """Record about half the demo piles of ``project_id`` through the save path, as the user
    ``inspector_email``; returns counts by verdict.

    Runs inside an app context (made here when there is none). Piles already recorded are left
    alone, so a second call adds nothing.
    """
    if not has_app_context():
        with app.app_context():
            return add_records(app, project_id, inspector_email)

    conn = db.get_db()
    inspector = users.by_email(conn, inspector_email)
    rules = projects.current_rules(conn, project_id).rules
    all_piles = sorted(piles_q.list_piles(conn, project_id), key=lambda p: natural_key(p.mark))
    chosen = [p for i, p in enumerate(all_piles) if i % 2 == 0]

    # One fault each on piles chosen for it: the toe on a single bored pile, the position on a
    # pile of the largest cap, the others spread over the rest.
    faults: dict[str, str] = {}
    caps_size: dict[str | None, int] = {}
    for p in all_piles:
        caps_size[p.cap_mark] = caps_size.get(p.cap_mark, 0) + 1
    in_big_cap = [p for p in chosen if p.cap_mark and caps_size[p.cap_mark] >= 4 and p.pile_type == "bored"]
    bored = [p for p in chosen if p.pile_type == "bored" and p not in in_big_cap[:1]]
    if in_big_cap:
        faults[in_big_cap[0].mark] = "position"
    # the cover fault on a pile of a harsher exposure class than the usual XC2 when there is one
    harsh = [p for p in bored if p.mark not in faults and p.exposure_class != "XC2"]
    if harsh:
        faults[harsh[0].mark] = "cover"
    pool = [p for p in bored if p.mark not in faults]
    wanted = [f for f in SHORTS if f != "position" and f not in faults.values()]
    for fault, pile in zip(wanted, pool[1::2], strict=False):
        faults[pile.mark] = fault
    partial = {chosen[-1].mark: "boring", chosen[-2].mark: "concreted"}

    counts: dict[str, int] = {}
    for i, pile in enumerate(chosen):
        if pile.current_version:
            continue
        ground = load_ground(conn, pile.ground_model_id)
        platform = round(ground.top, 2)
        start = START + timedelta(days=i // 5, minutes=95 * (i % 5))
        need = None
        fault = faults.get(pile.mark)
        if fault == "toe":
            need = required_toe_for(pile_design(pile), None, ground, rules).level_m
        record = record_for(pile, platform, rules, start, fault, need, partial.get(pile.mark, "logged"))
        outcome = save_record(conn, project_id, pile, inspector, _client_id(pile.mark, "record", 1),
                                       None, record)
        verdict = outcome.version.verdict
        counts[verdict] = counts.get(verdict, 0) + 1
        kinds = ["base", "finished"] if pile.pile_type == "bored" else ["pour", "finished"]
        if fault:
            kinds = ["base" if fault in ("debris", "toe") else "cage" if fault in ("cover", "cage") else "pour", "finished"]
        for k, kind in enumerate(kinds[: 1 if record["progress"] == "boring" else 2]):
            taken = start + timedelta(minutes=120 + 60 * k)
            photos.add_photo(conn, project_id, pile, inspector, _client_id(pile.mark, "photo", kind),
                             kind, f"{pile.mark} {kind}" + (f" ({fault})" if fault and k == 0 else ""),
                             drawn_photo(pile.mark, kind, taken), app.config["PHOTO_DIR"])
    return counts
