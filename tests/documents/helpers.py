"""Reading PDFs back, and rendering a page to PNG."""

import io
import os
import re
import shutil
import subprocess

import pytest
from pypdf import PdfReader


def pdf_pages(data: bytes) -> list[str]:
    """Each page's text with runs of whitespace folded to one space."""
    reader = PdfReader(io.BytesIO(data))
    return [re.sub(r"\s+", " ", page.extract_text() or "") for page in reader.pages]


def pdf_text(data: bytes) -> str:
    return " ".join(pdf_pages(data))


def render_png(data: bytes, tmp_path) -> bytes:
    """Page 1 at 50 dpi through poppler. CI (HOLDFAST_REQUIRE_BROWSER=1) must not skip."""
    if shutil.which("pdftoppm") is None:
        if os.environ.get("HOLDFAST_REQUIRE_BROWSER") == "1":
            pytest.fail("pdftoppm is required here (HOLDFAST_REQUIRE_BROWSER=1)")
        pytest.skip("pdftoppm (poppler-utils) is not installed")
    source = tmp_path / "doc.pdf"
    source.write_bytes(data)
    result = subprocess.run(
        ["pdftoppm", "-png", "-r", "50", "-f", "1", "-l", "1", str(source), str(tmp_path / "p")],
        capture_output=True,
        timeout=60,
        check=False,
    )
    assert result.returncode == 0, result.stderr.decode()
    pngs = sorted(tmp_path.glob("p*.png"))
    assert len(pngs) == 1
    png = pngs[0].read_bytes()
    assert png.startswith(b"\x89PNG")
    return png
