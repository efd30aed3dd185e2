"""The text of each page of a PDF as poppler's ``pdftotext`` reads it (Debian's poppler-utils)."""

from __future__ import annotations

import subprocess


def pdftotext_pages(path) -> list[str]:
    """Each page's text, in reading order; pdftotext ends every page with a form feed."""
    done = subprocess.run(["pdftotext", "-enc", "UTF-8", str(path), "-"], capture_output=True, check=True)
    return done.stdout.decode("utf-8").split("\f")[:-1]
