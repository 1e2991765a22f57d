"""Draw Toeline's app icons with Pillow (run once; the PNGs are committed in static/icons).

The mark: a pile (a white shaft) standing in ground (a lighter band), with the toe line drawn
across beneath its tip, on the app's dark green. ``maskable`` keeps everything inside the
central 80 % safe zone that Android crops to a circle or squircle.

    python deploy/make_icons.py
"""

from __future__ import annotations

from pathlib import Path

from PIL import Image, ImageDraw

OUT = Path(__file__).resolve().parent.parent / "static" / "icons"
GREEN = (11, 61, 46)
GROUND = (46, 110, 82)
WHITE = (255, 255, 255)
YELLOW = (255, 212, 0)


def draw(size: int, maskable: bool) -> Image.Image:
    """One square icon of ``size`` pixels."""
    scale = 4  # draw large and shrink for smooth edges
    s = size * scale
    img = Image.new("RGB", (s, s), GREEN)
    d = ImageDraw.Draw(img)
    inset = 0.1 * s if maskable else 0.0  # 80 % safe zone for maskable icons
    box = s - 2 * inset

    def x(f: float) -> float:
        return inset + f * box

    d.rectangle([x(0.0) if maskable else 0, x(0.42), x(1.0) if maskable else s, x(1.0) if maskable else s],
                fill=GROUND)
    d.rectangle([x(0.40), x(0.12), x(0.60), x(0.74)], fill=WHITE)           # the pile shaft
    d.rectangle([x(0.30), x(0.08), x(0.70), x(0.16)], fill=WHITE)           # the pile head
    d.rectangle([x(0.14), x(0.80), x(0.86), x(0.85)], fill=YELLOW)          # the toe line
    return img.resize((size, size), Image.LANCZOS)


def main() -> None:
    OUT.mkdir(parents=True, exist_ok=True)
    for size in (192, 512):
        draw(size, False).save(OUT / f"icon-{size}.png", optimize=True)
    draw(512, True).save(OUT / "icon-maskable-512.png", optimize=True)
    draw(180, False).save(OUT / "apple-touch-icon.png", optimize=True)
    for p in sorted(OUT.glob("*.png")):
        print(p.name, p.stat().st_size, "bytes")


if __name__ == "__main__":
    main()
