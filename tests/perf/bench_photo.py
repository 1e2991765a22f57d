"""Photo ingest benchmark (issue 8): a 12-megapixel camera JPEG through ``fieldapp.photos.ingest``.

The image is made here with Pillow: 4000 x 3000 px of smooth gradients with fine noise (so it
compresses like a photograph, about 3 to 5 MB at quality 90), with an EXIF orientation of 6
(the camera held upright) and a capture time, as a tablet camera writes them. Each ingest goes
to a fresh temporary photo folder, so every run writes its original, display copy and
thumbnail (nothing is skipped as already stored).

Figures: ``photo_ms`` the median ingest (verify, full decode, orient, 1600 px and 320 px copies,
SHA-256, three files written); ``photo_decode_ms`` the median of Pillow decoding the same file
at full size and nothing else; ``photo_vs_full_decode`` their ratio; the ``_cpu_ms`` figures
are the same medians in process CPU time (ingest writes files and Pillow may use a second
thread, so CPU and wall differ even on an idle machine; on a busy one the wall time grows).
"""

from __future__ import annotations

import io
import shutil
import statistics
import tempfile
import time

import numpy as np
from PIL import Image

WIDTH, HEIGHT = 4000, 3000
REPEAT = 7


def camera_jpeg(seed: int = 1) -> bytes:
    """An invented 12-megapixel photo as a camera would save it (module docstring)."""
    rng = np.random.default_rng(seed)
    y, x = np.mgrid[0:HEIGHT, 0:WIDTH].astype(np.float32)
    base = np.stack([128 + 90 * np.sin(x / 430.0 + k) * np.cos(y / 310.0 - k) for k in (0.0, 1.3, 2.1)], axis=-1)
    pixels = np.clip(base + rng.normal(0, 6, base.shape), 0, 255).astype(np.uint8)
    image = Image.fromarray(pixels, "RGB")
    exif = Image.Exif()
    exif[0x0112] = 6  # orientation: rotate 90 degrees clockwise to view
    exif[0x0132] = "2026:03:02 11:20:00"  # DateTime
    out = io.BytesIO()
    image.save(out, "JPEG", quality=90, exif=exif.tobytes())
    return out.getvalue()


def _median_ms(fn, repeat: int) -> tuple[float, float]:
    """Median wall time and median CPU time (ms) of ``fn``."""
    wall, cpu = [], []
    for _ in range(repeat):
        t0, c0 = time.perf_counter(), time.process_time()
        fn()
        wall.append((time.perf_counter() - t0) * 1e3)
        cpu.append((time.process_time() - c0) * 1e3)
    return statistics.median(wall), statistics.median(cpu)


def run() -> dict:
    """Time ``ingest`` and a plain full-size decode of the same 12-megapixel JPEG."""
    from fieldapp import photos

    data = camera_jpeg()
    folders = []

    def ingest_once():
        folder = tempfile.mkdtemp(prefix="toeline-bench-photo-")
        folders.append(folder)
        stored = photos.ingest(data, folder)
        assert stored.width == HEIGHT and stored.height == WIDTH, "orientation was not applied"

    def decode_once():
        with Image.open(io.BytesIO(data)) as im:
            im.load()

    try:
        ingest_once(), decode_once()  # warm up
        photo_ms, photo_cpu_ms = _median_ms(ingest_once, REPEAT)
        decode_ms, decode_cpu_ms = _median_ms(decode_once, REPEAT)
    finally:
        for folder in folders:
            shutil.rmtree(folder, ignore_errors=True)
    print(f"  JPEG {len(data) / 1e6:.1f} MB, {WIDTH} x {HEIGHT} px")
    return {"photo_ms": photo_ms, "photo_cpu_ms": photo_cpu_ms, "photo_decode_ms": decode_ms,
            "photo_decode_cpu_ms": decode_cpu_ms, "photo_vs_full_decode": photo_ms / decode_ms}


if __name__ == "__main__":
    for name, value in run().items():
        print(f"{name:<22}{value:10.4g}")
