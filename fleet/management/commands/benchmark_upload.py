"""Peak memory of one photo upload: ``python manage.py benchmark_upload [--megapixels 20]``.

Builds a camera-sized photo (a JPEG by default; ``--format png`` builds a mostly transparent
PNG, the small-file, many-pixel case), then runs ``fleet.photos.clean_photo`` on it in a fresh
Python process and reports two peaks for that one call:

- tracemalloc: memory Python itself allocated (the upload's bytes, the encoded result);
- the process's peak resident size during the call above its size before it (Linux: the
  kernel's peak mark is reset first): this one also counts Pillow's pixel buffers, which
  Pillow allocates in C where tracemalloc cannot see them.

It writes nothing to the database and needs no settings beyond a ``SECRET_KEY``.
"""

import io
import json
import resource
import subprocess
import sys
import tempfile
import time
import tracemalloc
import warnings
from pathlib import Path
from typing import Any

from django.core.exceptions import ValidationError
from django.core.files.uploadedfile import SimpleUploadedFile
from django.core.management.base import BaseCommand, CommandError, CommandParser
from PIL import Image

from fleet.photos import clean_photo

ASPECT = 3 / 2  # a common camera frame


def _status_bytes(field: str) -> int | None:
    """A ``VmRSS``/``VmHWM`` line of /proc/self/status in bytes, or None off Linux."""
    try:
        for line in Path("/proc/self/status").read_text().splitlines():
            if line.startswith(f"{field}:"):
                return int(line.split()[1]) * 1024  # reported in kB
    except OSError:
        return None
    return None


def _start_peak() -> int:
    """Reset the kernel's peak-RSS mark where Linux allows it; the resident size now."""
    try:
        Path("/proc/self/clear_refs").write_text("5")  # resets VmHWM to VmRSS (Linux >= 4.0)
    except OSError:
        pass
    now = _status_bytes("VmRSS")
    return now if now is not None else resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024


def _peak() -> int:
    peak = _status_bytes("VmHWM")
    return peak if peak is not None else resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024


def build_photo(megapixels: float, fmt: str) -> bytes:
    """A deterministic test photo of about ``megapixels`` at 3:2."""
    height = round((megapixels * 1_000_000 / ASPECT) ** 0.5)
    width = round(height * ASPECT)
    out = io.BytesIO()
    if fmt == "png":
        image = Image.new("RGBA", (width, height), (0, 0, 0, 0))
        image.paste((40, 80, 120, 255), (width // 3, height // 3, width // 2, height // 2))
        image.save(out, format="PNG", optimize=True)
        return out.getvalue()
    # Smooth shading plus sensor-like noise, so the JPEG is as large as a real photo's.
    shade = Image.linear_gradient("L").resize((width, height))
    noise = Image.effect_noise((width, height), 18)
    image = Image.merge("RGB", (shade, noise, Image.blend(shade, noise, 0.5)))
    image.save(out, format="JPEG", quality=90)
    return out.getvalue()


def measure(path: Path) -> dict[str, Any]:
    """Run clean_photo once on the file at ``path`` in this process; the peaks of that call."""
    data = path.read_bytes()
    content_type = "image/png" if path.suffix == ".png" else "image/jpeg"
    upload = SimpleUploadedFile(path.name, data, content_type)
    rss_before = _start_peak()
    tracemalloc.start()
    started = time.perf_counter()
    try:
        cleaned = clean_photo(upload)
        result = cleaned.read()
        with Image.open(io.BytesIO(result)) as out:
            outcome = f"re-encoded to a {out.width}x{out.height} JPEG of {len(result):,} bytes"
    except ValidationError as exc:
        outcome = f"refused ({exc.code}): {' '.join(exc.messages)}"
    seconds = time.perf_counter() - started
    _, python_peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    return {
        "outcome": outcome,
        "seconds": seconds,
        "tracemalloc_peak": python_peak,
        "rss_peak_increase": max(0, _peak() - rss_before),
    }


class Command(BaseCommand):
    help = "Peak memory of one photo upload through clean_photo, measured in a fresh process."

    def add_arguments(self, parser: CommandParser) -> None:
        parser.add_argument("--megapixels", type=float, default=20.0)
        parser.add_argument("--format", choices=["jpeg", "png"], default="jpeg")
        parser.add_argument("--measure", type=Path, help="(internal) measure this file here")

    def handle(self, *args: Any, **options: Any) -> None:
        if options["measure"] is not None:
            self.stdout.write(json.dumps(measure(options["measure"])))
            return
        megapixels: float = options["megapixels"]
        if not 0.01 <= megapixels <= 100:
            raise CommandError("--megapixels must be between 0.01 and 100.")
        fmt: str = options["format"]
        data = build_photo(megapixels, fmt)
        with tempfile.TemporaryDirectory() as scratch:
            path = Path(scratch) / f"photo.{'png' if fmt == 'png' else 'jpg'}"
            path.write_bytes(data)
            with warnings.catch_warnings():
                warnings.simplefilter("ignore", Image.DecompressionBombWarning)
                with Image.open(path) as probe:
                    width, height = probe.size
            size = f"{width}x{height} ({width * height / 1e6:.1f} MP)"
            # A fresh interpreter, so that the peak resident size belongs to this upload alone.
            child = subprocess.run(
                [sys.executable, "-m", "django", "benchmark_upload", "--measure", str(path)],
                capture_output=True,
                text=True,
                check=False,
            )
        if child.returncode != 0:
            raise CommandError(f"The measuring process failed:\n{child.stderr}")
        report = json.loads(child.stdout.strip().splitlines()[-1])
        mib = 1024 * 1024
        self.stdout.write(f"Upload: {fmt.upper()} {size}, {len(data):,} bytes")
        self.stdout.write(f"  {report['outcome']} in {report['seconds']:.2f} s")
        self.stdout.write(
            f"  peak Python allocations (tracemalloc): {report['tracemalloc_peak'] / mib:.1f} MiB"
        )
        self.stdout.write(
            "  peak resident memory above the size before the call (incl. Pillow's pixel "
            f"buffers): {report['rss_peak_increase'] / mib:.1f} MiB"
        )
