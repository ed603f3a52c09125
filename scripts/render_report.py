"""Render a sweep folder's report page to a PNG with headless Chromium.

Usage::

    python scripts/render_report.py DIR [--out PNG] [--width 1400] [--height 4000] [--write]

``DIR/report/index.html`` must exist (``--write`` writes it first with
:func:`codebench.report.write_report`). The PNG (default
``DIR/report/report.png``) is one screenshot of a ``width`` x ``height``
window: a quick look at how the page reads, for instance before a review.
:func:`dump_dom` gives the page's DOM after it loaded, scripts run, at a
given window size (``tests/test_report_layout.py`` measures the layout so).

Chromium runs with a fresh, throw-away profile and with every background
service it offers turned off (no network access beyond the local file). It
is looked up as ``chromium`` on the PATH, then ``/usr/bin/chromium``; on
Debian or Ubuntu install it with ``apt-get install chromium chromium-driver``.
Exit status: 0 on success, 2 for a missing page or missing Chromium, 1 if
Chromium fails.
"""

from __future__ import annotations

import argparse
import shutil
import subprocess
import sys
import tempfile
from pathlib import Path

CANDIDATES = ("chromium", "chromium-browser", "/usr/bin/chromium")
INSTALL_HINT = "install it with: apt-get install chromium chromium-driver"


def find_chromium() -> str | None:
    for name in CANDIDATES:
        found = shutil.which(name)
        if found:
            return found
    return None


def chromium_command(binary: str, page: Path, png: Path | None, profile: Path, width: int, height: int) -> list[str]:
    """Chromium's command line: a screenshot into ``png``, or with ``png`` None the DOM on standard output.

    Scrollbars are hidden in screenshots only; the DOM is laid out with them, as a reader's window is.
    """
    action = ["--hide-scrollbars", f"--screenshot={png}"] if png is not None else ["--dump-dom"]
    return [
        binary,
        "--headless",
        "--no-sandbox",
        "--disable-gpu",
        "--disable-quic",
        "--no-first-run",
        "--disable-background-networking",
        "--disable-component-update",
        "--disable-sync",
        f"--user-data-dir={profile}",
        *action,
        f"--window-size={width},{height}",
        page.resolve().as_uri(),
    ]


def _run_chromium(page: Path, png: Path | None, width: int, height: int,
                  timeout: float) -> subprocess.CompletedProcess[str]:
    binary = find_chromium()
    if binary is None:
        raise FileNotFoundError(f"Chromium was not found (looked for {', '.join(CANDIDATES)}); {INSTALL_HINT}.")
    with tempfile.TemporaryDirectory(prefix="codebench-chromium-") as profile:
        command = chromium_command(binary, page, png, Path(profile), width, height)
        try:
            return subprocess.run(command, capture_output=True, text=True, timeout=timeout)
        except subprocess.TimeoutExpired as exc:
            raise RuntimeError(f"Chromium did not finish within {timeout:.0f} s.") from exc


def _failure(result: subprocess.CompletedProcess[str], what: str) -> RuntimeError:
    detail = (result.stderr or result.stdout).strip().splitlines()[-5:]
    return RuntimeError(f"Chromium exited with status {result.returncode} and wrote no {what}:\n" + "\n".join(detail))


def dump_dom(page: Path, width: int = 1280, height: int = 2000, timeout: float = 180.0) -> str:
    """``page``'s DOM after loading in a ``width`` x ``height`` window; errors as :func:`render`."""
    result = _run_chromium(page, None, width, height, timeout)
    if "<html" not in result.stdout:
        raise _failure(result, "DOM")
    return result.stdout


def render(page: Path, png: Path, width: int = 1400, height: int = 4000, timeout: float = 180.0) -> Path:
    """Screenshot ``page`` into ``png``; raises FileNotFoundError without Chromium, RuntimeError if it fails."""
    png.parent.mkdir(parents=True, exist_ok=True)
    if png.exists():
        png.unlink()
    result = _run_chromium(page, png.resolve(), width, height, timeout)
    if not png.exists():
        raise _failure(result, "screenshot")
    return png


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description="Render DIR/report/index.html to a PNG with headless Chromium.")
    parser.add_argument("folder", type=Path, help="the sweep folder (holds report/index.html)")
    parser.add_argument("--out", type=Path, default=None, help="PNG to write (default DIR/report/report.png)")
    parser.add_argument("--width", type=int, default=1400, help="window width in pixels (default 1400)")
    parser.add_argument("--height", type=int, default=4000, help="window height in pixels (default 4000)")
    parser.add_argument("--write", action="store_true", help="write the report first (figures, HTML, Markdown)")
    args = parser.parse_args(argv)
    page = args.folder / "report" / "index.html"
    if args.write:
        from codebench.report import write_report

        page = write_report(args.folder)
    if not page.exists():
        print(f"error: no report page at '{page}' (write it with codebench.report.write_report, or pass --write).",
              file=sys.stderr)
        return 2
    out = args.out if args.out is not None else page.parent / "report.png"
    try:
        render(page, out, args.width, args.height)
    except FileNotFoundError as exc:
        print(f"error: {exc}", file=sys.stderr)
        return 2
    except RuntimeError as exc:
        print(f"error: {exc}", file=sys.stderr)
        return 1
    print(f"wrote {out}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
