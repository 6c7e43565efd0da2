"""``report.pdf`` from ``report.html`` with a headless Chromium, when one is on the machine.

The page's own print CSS sets the paper (A4 or US Letter), margins, page breaks and the header
on every page; Chromium only lays it out. Without a Chromium the report stays usable: the
message says how to get the PDF (install the Debian package ``chromium``, or print
``report.html`` from any browser).
"""

from __future__ import annotations

import os
import shutil
import subprocess
import tempfile
from dataclasses import dataclass
from pathlib import Path

__all__ = ["CHROMIUM_NAMES", "find_chromium", "print_to_pdf", "PdfOutcome", "NO_CHROMIUM"]

#: Executable names tried, in order (Debian's package installs ``chromium``).
CHROMIUM_NAMES: tuple[str, ...] = ("chromium", "chromium-browser", "google-chrome",
                                   "google-chrome-stable")
#: Environment variable naming a Chromium executable explicitly.
CHROMIUM_VARIABLE = "ROBUSTFF_CHROMIUM"
NO_CHROMIUM = (
    "report.pdf not written: no headless Chromium found (tried {names}). To get the PDF, "
    "install one (Debian/Ubuntu: apt-get install chromium) and run again, or open report.html "
    "in a browser and print it to PDF (A4 or Letter; the page sets margins, breaks and headers)"
)
_TIMEOUT = 120.0


@dataclass(frozen=True)
class PdfOutcome:
    """What happened: the PDF written (``path``) or not, with a sentence for the engineer."""

    path: Path | None
    message: str


def find_chromium() -> str | None:
    """Path of a Chromium executable: ``$ROBUSTFF_CHROMIUM``, else the first on ``PATH``."""
    named = os.environ.get(CHROMIUM_VARIABLE)
    if named:
        return shutil.which(named)
    for name in CHROMIUM_NAMES:
        found = shutil.which(name)
        if found:
            return found
    return None


def print_to_pdf(html_path: Path, pdf_path: Path, chromium: str | None = None,
                 timeout: float = _TIMEOUT) -> PdfOutcome:
    """Print ``html_path`` to ``pdf_path`` with headless Chromium.

    Parameters
    ----------
    html_path, pdf_path : Path
    chromium : str, optional
        The executable (default: :func:`find_chromium`).
    timeout : float
        Seconds before Chromium is stopped.

    Returns
    -------
    PdfOutcome
        ``path`` None when no PDF was written; ``message`` says why and what to do.
    """
    executable = chromium or find_chromium()
    if executable is None:
        return PdfOutcome(None, NO_CHROMIUM.format(names=", ".join(CHROMIUM_NAMES)))
    with tempfile.TemporaryDirectory(prefix="robustff-chromium-") as profile:
        # --no-sandbox: Chromium's sandbox refuses to start as root (CI runs as root); the page
        # is our own file, without scripts, and nothing is fetched from a network.
        command = [
            executable, "--headless", "--disable-gpu", "--no-sandbox",
            "--no-first-run", "--no-default-browser-check", "--disable-extensions",
            "--disable-background-networking", "--disable-component-update", "--disable-sync",
            f"--user-data-dir={profile}", "--no-pdf-header-footer",
            f"--print-to-pdf={pdf_path.resolve()}", html_path.resolve().as_uri(),
        ]
        try:
            done = subprocess.run(command, capture_output=True, text=True, timeout=timeout,
                                  stdin=subprocess.DEVNULL, env={**os.environ, "HOME": profile})
        except subprocess.TimeoutExpired:
            return PdfOutcome(None, f"report.pdf not written: {executable} did not finish within "
                              f"{timeout:g} s; print report.html from a browser instead")
        except OSError as exc:
            return PdfOutcome(None, f"report.pdf not written: cannot start {executable} "
                              f"({exc.strerror or exc}); print report.html from a browser")
    if done.returncode != 0 or not pdf_path.is_file() or pdf_path.stat().st_size == 0:
        tail = (done.stderr or "").strip().splitlines()[-1:] or ["no message"]
        return PdfOutcome(None, f"report.pdf not written: {executable} failed (status "
                          f"{done.returncode}: {tail[0][:200]}); print report.html from a browser")
    return PdfOutcome(pdf_path, f"report.pdf written with {executable}")
