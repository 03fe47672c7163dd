"""Regenerate docs/screenshots/dashboard.png and report.png.

Starts ``boundsvc serve`` on a free loopback port with a temporary SQLite database, creates
the certificates of ``tests/reports/seed.py`` (heat equation at several perturbation sizes
and training epochs, a vacuous Burgers blow-up) and a study through the HTTP API, and
photographs the pages with headless Chromium (the system's ``/usr/bin/chromium``, driven by
Playwright for Python; ``playwright install`` is not needed).

Usage: ``.venv/bin/python tools/screenshots.py [--out docs/screenshots]``
"""

from __future__ import annotations

import argparse
import sys
import tempfile
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(REPO))

from tests.browser.conftest import CHROMIUM, CHROMIUM_ARGS, start_server, stop_server  # noqa: E402
from tests.reports.seed import heat_certificate, vacuous_certificate  # noqa: E402

EPS = (1e-3, 2e-3, 5e-3, 1e-2, 2e-2, 5e-2)


def seed(post: object) -> dict[str, str]:
    """Certificates of one model over training epochs (eps shrinking), a vacuous one, a study."""
    docs, errors = [], []
    for epoch, eps in enumerate(reversed(EPS), start=1):
        doc, err = heat_certificate(
            post,
            eps,
            model={"name": "strip-cooling-mlp", "version": f"1.{epoch}", "epoch": 200 * epoch},
        )
        docs.append(doc)
        errors.append(err)
    vacuous_certificate(post, model={"name": "burgers-blowup-net", "version": "0.3"})
    ids = [d["id"] for d in docs]
    study = post(
        "/v1/studies",
        {  # type: ignore[operator]
            "certificate_ids": ids,
            "measured_errors": dict(zip(ids, errors, strict=True)),
            "swept_parameter": {
                "name": "eps",
                "values": dict(zip(ids, reversed(EPS), strict=True)),
            },
            "title": "Heat equation: bound against perturbation size",
        },
    )
    return {"report": docs[2]["id"], "study": study["id"]}


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--out", type=Path, default=REPO / "docs" / "screenshots")
    args = parser.parse_args()
    from playwright.sync_api import sync_playwright

    args.out.mkdir(parents=True, exist_ok=True)
    with tempfile.TemporaryDirectory() as tmp:
        server = start_server(Path(tmp))
        try:
            ids = seed(server.post)
            with sync_playwright() as pw:
                browser = pw.chromium.launch(executable_path=str(CHROMIUM), args=CHROMIUM_ARGS)
                page = browser.new_page(
                    viewport={"width": 1280, "height": 800}, device_scale_factor=1
                )
                shots = {
                    "dashboard.png": "/dashboard",
                    "report.png": f"/dashboard/certificates/{ids['report']}",
                    "study.png": f"/dashboard/studies/{ids['study']}",
                }
                for name, path in shots.items():
                    page.goto(server.url + path, wait_until="networkidle")
                    page.screenshot(path=str(args.out / name), full_page=True)
                    print(f"wrote {args.out / name}")
                browser.close()
        finally:
            stop_server(server)
    return 0


if __name__ == "__main__":
    sys.exit(main())
