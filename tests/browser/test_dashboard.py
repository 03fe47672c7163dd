"""The dashboard and reports in headless Chromium against a real ``boundsvc serve``."""

from __future__ import annotations

from collections.abc import Iterator
from typing import Any

import pytest

from boundsvc.store import open_store
from tests.browser.conftest import PageWatch, Server, start_server, stop_server
from tests.reports.seed import heat_certificate, vacuous_certificate

pytestmark = pytest.mark.subprocess


@pytest.fixture(scope="module")
def server(sync_api: Any, tmp_path_factory: pytest.TempPathFactory) -> Iterator[Server]:
    """API-key mode (keys of project lab-a) with three heat certificates of one model at
    several epochs, a vacuous certificate and a study."""
    tmp = tmp_path_factory.mktemp("browser")
    store = open_store(f"sqlite:///{tmp / 'boundsvc.sqlite3'}")
    _, writer = store.create_api_key("lab-a", "seeding", ["read", "write"])
    _, reader = store.create_api_key("lab-a", "browser", ["read"])
    store.dispose()
    srv = start_server(tmp, token=writer)
    try:
        heat, errors = [], []
        for epoch, eps in enumerate((1e-3, 1e-2, 1e-1), start=1):
            doc, err = heat_certificate(
                srv.post,
                eps,
                model={"name": "heat-mlp", "version": f"v{epoch}", "epoch": 100 * epoch},
            )
            heat.append(doc)
            errors.append(err)
        vacuous = vacuous_certificate(srv.post, model={"name": "burgers-net", "version": "1"})
        ids = [d["id"] for d in heat]
        study = srv.post(
            "/v1/studies",
            {
                "certificate_ids": ids,
                "measured_errors": dict(zip(ids, errors, strict=True)),
                "swept_parameter": {
                    "name": "eps",
                    "values": dict(zip(ids, (1e-3, 1e-2, 1e-1), strict=True)),
                },
                "title": "heat: eps sweep",
            },
        )
        srv.seeded = {"heat": heat, "vacuous": vacuous, "study": study, "reader": reader}
        yield srv
    finally:
        stop_server(srv)


@pytest.fixture
def signed_in(server: Server, browser: Any) -> Iterator[PageWatch]:
    """A browser context holding the session cookie of the read-only key."""
    context = browser.new_context(viewport={"width": 1280, "height": 900})
    context.add_cookies(
        [
            {
                "name": "boundsvc_session",
                "value": server.seeded["reader"],
                "url": server.url,
                "httpOnly": True,
                "sameSite": "Strict",
            }
        ]
    )
    yield PageWatch(context.new_page())
    context.close()


def _visit(watch: PageWatch, url: str) -> None:
    response = watch.page.goto(url, wait_until="load")
    assert response is not None and response.status == 200, url


def _assert_images_render(watch: PageWatch, at_least: int) -> None:
    images = watch.images()
    assert len(images) >= at_least, images
    assert all(width > 0 for _, width in images), images


def test_pages_load_without_console_errors(server: Server, signed_in: PageWatch) -> None:
    watch = signed_in
    heat, study = server.seeded["heat"], server.seeded["study"]
    for path, images in (
        ("/dashboard", 0),
        ("/dashboard/models/heat-mlp", 1),
        (f"/dashboard/certificates/{heat[0]['id']}", 2),
        ("/dashboard/studies", 0),
        (f"/dashboard/studies/{study['id']}", 2),
        (f"/v1/studies/{study['id']}/page", 2),
    ):
        _visit(watch, server.url + path)
        _assert_images_render(watch, images)
    assert watch.problems == []


def test_filters_change_the_list(server: Server, signed_in: PageWatch) -> None:
    watch = signed_in
    _visit(watch, server.url + "/dashboard")
    rows = watch.page.locator("#certificates tbody tr")
    assert rows.count() == 4
    with watch.page.expect_navigation():
        watch.page.select_option("select[name=status]", "vacuous")  # submitted by dashboard.js
    assert "status=vacuous" in watch.page.url
    assert rows.count() == 1
    assert rows.first.get_attribute("data-id") == server.seeded["vacuous"]["id"]
    watch.page.fill("input[name=model]", "heat-mlp")
    with watch.page.expect_navigation():
        watch.page.select_option("select[name=status]", "")
    assert "model=heat-mlp" in watch.page.url
    assert rows.count() == 3
    assert watch.problems == []


def test_report_shows_its_bound_and_plot(server: Server, signed_in: PageWatch) -> None:
    watch = signed_in
    doc = server.seeded["heat"][1]
    _visit(watch, f"{server.url}/v1/certificates/{doc['id']}/report")
    headline = watch.page.locator("#headline-bound").inner_text()
    assert f"{doc['bound']['l2_space_time']:.4g}" in headline
    assert watch.page.locator(".caution").is_visible()
    _assert_images_render(watch, 2)  # the plot and at least one rendered formula
    vacuous = server.seeded["vacuous"]
    _visit(watch, f"{server.url}/dashboard/certificates/{vacuous['id']}")
    assert "finite only up to" in watch.page.locator(".alert").inner_text()
    _assert_images_render(watch, 1)
    assert watch.problems == []


def test_sign_in_with_an_api_key(server: Server, watch: PageWatch) -> None:
    """Without a session the dashboard asks for a key, then shows the key's project."""
    watch.page.goto(server.url + "/dashboard", wait_until="load")
    assert watch.page.url.endswith("/dashboard/login")
    watch.page.fill("input[name=api_key]", "bsk_0000000000000000_wrong")
    with watch.page.expect_navigation():
        watch.page.click("button[type=submit]")
    assert "unknown, revoked" in watch.page.locator(".alert").inner_text()
    watch.page.fill("input[name=api_key]", server.seeded["reader"])
    with watch.page.expect_navigation():
        watch.page.click("button[type=submit]")
    assert watch.page.url.endswith("/dashboard")
    assert "lab-a" in watch.page.locator(".session").inner_text()
    assert watch.page.locator("#certificates tbody tr").count() == 4
    cookies = watch.page.context.cookies()
    assert [(c["name"], c["httpOnly"], c["sameSite"]) for c in cookies] == [
        ("boundsvc_session", True, "Strict")
    ]
    with watch.page.expect_navigation():
        watch.page.click("text=Log out")
    assert watch.page.url.endswith("/dashboard/login")
    assert watch.page.context.cookies() == []
    # the expected refusals of this test: the redirect to the form and the wrong key
    assert all("401" in p or "login" in p for p in watch.problems), watch.problems
