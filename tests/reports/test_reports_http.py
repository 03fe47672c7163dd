"""Reports, studies and the dashboard through the HTTP API of the in-process app."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
from markupsafe import escape
from scipy import stats

from boundsvc.store import Store
from tests.cli.inprocess import client_of
from tests.reports.conftest import EPS, Seeded

PNG = b"\x89PNG\r\n\x1a\n"


def _study_body(s: Seeded, **extra: object) -> dict[str, object]:
    ids = [d["id"] for d in s.heat]
    return {
        "certificate_ids": ids,
        "measured_errors": dict(zip(ids, s.errors, strict=True)),
        "swept_parameter": {"name": "eps", "values": dict(zip(ids, EPS, strict=True))},
        "title": "heat: bound against perturbation size",
    } | extra


def test_heat_study_shows_the_bound_growing_with_eps(seeded: Seeded) -> None:
    """One problem (heat equation, Strauss 2008 sec. 4.1) certified at eps = 1e-3 ... 6.4e-2:
    the bound must increase with eps and stay above the true error."""
    study = seeded.post("/v1/studies", _study_body(seeded))
    assert study["id"].startswith("std_")
    trend = study["parameter_trend"]
    assert trend["name"] == "eps" and trend["bound"] == "increasing"
    assert trend["measured_error"] == "increasing"
    assert trend["spearman_bound"]["rho"] == pytest.approx(1.0)
    bounds = [i["bound"] for i in study["items"]]
    assert bounds == sorted(bounds)
    assert study["effectivity"]["all_at_least_one"] is True
    assert study["effectivity"]["min"] >= 1.0


def test_study_correlations_agree_with_scipy_on_the_stored_numbers(seeded: Seeded) -> None:
    study = seeded.post("/v1/studies", _study_body(seeded, confidence_level=0.9))
    b = np.log10([i["bound"] for i in study["items"]])
    e = np.log10([i["measured_error"] for i in study["items"]])
    ref = stats.pearsonr(b, e)
    pearson = study["correlation"]["pearson"]
    assert pearson["r"] == pytest.approx(ref.statistic, rel=1e-12)
    if abs(ref.statistic) < 1 - 1e-12:
        ci = ref.confidence_interval(confidence_level=0.9)
        assert pearson["ci"] == pytest.approx([ci.low, ci.high], rel=1e-12)
    assert study["correlation"]["spearman"]["rho"] == pytest.approx(stats.spearmanr(b, e).statistic)
    eff = 10 ** (b - e)
    assert study["effectivity"]["median"] == pytest.approx(float(np.median(eff)), rel=1e-12)


def test_studies_are_stored_listed_and_rendered(seeded: Seeded) -> None:
    first = seeded.post("/v1/studies", _study_body(seeded, title="listed"))
    again = seeded.post("/v1/studies", _study_body(seeded, title="listed"))
    assert again == first  # content-addressed: the same request, the same study
    listed = seeded.http.get("/v1/studies").json()["items"]
    assert first["id"] in [s["id"] for s in listed]
    assert seeded.http.get(f"/v1/studies/{first['id']}").json() == first
    page = seeded.http.get(f"/v1/studies/{first['id']}/page")
    assert page.status_code == 200 and "text/html" in page.headers["content-type"]
    assert "listed" in page.text and "increasing" in page.text
    png = seeded.http.get(f"/v1/studies/{first['id']}/scatter.png")
    assert png.status_code == 200 and png.content.startswith(PNG)
    svg = seeded.http.get(f"/v1/studies/{first['id']}/sweep.svg")
    assert svg.headers["content-type"].startswith("image/svg+xml") and b"<svg" in svg.content
    assert seeded.http.get(f"/v1/studies/{first['id']}/other.png").status_code == 404


def test_study_requests_are_validated(seeded: Seeded) -> None:
    ids = [d["id"] for d in seeded.heat]
    r = seeded.http.post("/v1/studies", json={"certificate_ids": [*ids, "crt_nope"]})
    assert r.status_code == 404 and r.json()["code"] == "certificate_not_found"
    assert r.json()["errors"][0]["field"] == f"certificate_ids.{len(ids)}"
    r = seeded.http.post(
        "/v1/studies", json={"certificate_ids": ids[:1], "measured_errors": {"crt_other": 0.1}}
    )
    assert r.status_code == 422 and "crt_other" in r.text
    r = seeded.http.post(
        "/v1/studies", json={"certificate_ids": ids[:1], "measured_errors": {ids[0]: -1.0}}
    )
    assert r.status_code == 422 and "> 0" in r.text
    assert seeded.http.get("/v1/studies/std_missing").json()["code"] == "study_not_found"


def test_a_vacuous_certificate_stays_in_a_study_but_out_of_its_statistics(seeded: Seeded) -> None:
    ids = [d["id"] for d in seeded.heat] + [seeded.vacuous["id"]]
    study = seeded.post("/v1/studies", {"certificate_ids": ids, "bound": "l2_final_time"})
    assert len(study["items"]) == len(ids)
    assert study["items"][-1]["bound"] is None and "not counted" in study["items"][-1]["note"]
    assert study["effectivity"] is None  # no measured errors given


def test_report_shows_bound_terms_constants_rigor_and_caution(seeded: Seeded) -> None:
    doc = seeded.heat[1]
    r = seeded.http.get(f"/v1/certificates/{doc['id']}/report")
    assert r.status_code == 200 and r.headers["content-type"].startswith("text/html")
    assert "default-src 'none'" in r.headers["content-security-policy"]
    html = r.text
    assert f"{doc['bound']['l2_space_time']:.4g}" in html
    assert str(escape(doc["caution"])) in html
    for term in doc["terms"]:
        assert str(escape(term["name"])) in html
    assert 'src="plot.png"' in html
    assert "data:image/svg+xml;base64," in html  # the constants' LaTeX, rendered offline
    assert "http://" not in html.replace("http://www.w3.org", "")  # no external assets
    assert "heuristic" in html and "assumed" in html


def test_report_of_a_vacuous_certificate_marks_where(seeded: Seeded) -> None:
    doc = seeded.vacuous
    assert doc["status"] == "vacuous" and doc["vacuous_from"] is not None
    html = seeded.http.get(f"/v1/certificates/{doc['id']}/report").text
    assert "vacuous from t" in html or "finite only up to" in html
    assert f"{doc['vacuous_from']:.4g}" in html


@pytest.mark.parametrize(
    ("suffix", "media", "magic"), [("png", "image/png", PNG), ("svg", "image/svg+xml", b"<?xml")]
)
def test_plots(seeded: Seeded, suffix: str, media: str, magic: bytes) -> None:
    for doc in (seeded.heat[0], seeded.vacuous):
        r = seeded.http.get(f"/v1/certificates/{doc['id']}/plot.{suffix}")
        assert r.status_code == 200 and r.headers["content-type"].startswith(media)
        assert r.content.startswith(magic)


def test_missing_certificate_is_a_problem_json_404(seeded: Seeded) -> None:
    for path in ("report", "plot.png", "plot.svg"):
        r = seeded.http.get(f"/v1/certificates/crt_missing/{path}")
        assert r.status_code == 404 and r.json()["code"] == "certificate_not_found"


def test_dashboard_filters_change_the_list(seeded: Seeded) -> None:
    everything = seeded.http.get("/dashboard").text
    assert all(d["id"] in everything for d in [*seeded.heat, seeded.vacuous])
    vacuous = seeded.http.get("/dashboard", params={"status": "vacuous"}).text
    assert seeded.vacuous["id"] in vacuous and seeded.heat[0]["id"] not in vacuous
    by_model = seeded.http.get("/dashboard", params={"model": "heat-mlp", "version": "v2"}).text
    assert seeded.heat[1]["id"] in by_model and seeded.heat[0]["id"] not in by_model
    none = seeded.http.get("/dashboard", params={"family": "ode-system"}).text
    assert "No certificates match" in none


def test_model_page_plots_the_history_over_epochs(seeded: Seeded) -> None:
    page = seeded.http.get("/dashboard/models/heat-mlp")
    assert page.status_code == 200 and "by training epoch" in page.text
    png = seeded.http.get("/dashboard/models/heat-mlp/history.png")
    assert png.content.startswith(PNG)
    assert seeded.http.get("/dashboard/models/unknown-model").status_code == 404


def test_dashboard_pages_and_static_files(seeded: Seeded) -> None:
    cert = seeded.http.get(f"/dashboard/certificates/{seeded.heat[0]['id']}")
    assert (
        cert.status_code == 200 and f"/v1/certificates/{seeded.heat[0]['id']}/plot.png" in cert.text
    )
    assert seeded.http.get("/dashboard/studies").status_code == 200
    css = seeded.http.get("/dashboard/static/boundsvc.css")
    assert css.headers["content-type"].startswith("text/css")
    assert seeded.http.get("/dashboard/static/../app.py").status_code == 404


def test_keys_sign_in_with_a_cookie_that_only_reads(seeded: Seeded) -> None:
    """With API keys the dashboard needs a sign-in; the cookie sees its project only and
    never authorises a write."""
    store: Store = seeded.app.state.store
    _, token = store.create_api_key("lab-b", "browser", ["read", "write"])
    seeded.app.state.authenticator.invalidate()
    try:
        http = seeded.http
        r = http.get("/dashboard", follow_redirects=False)
        assert r.status_code == 303 and r.headers["location"] == "/dashboard/login"
        assert http.get("/dashboard/login").status_code == 200
        bad = http.post("/dashboard/login", data={"api_key": "bsk_0000000000000000_nope"})
        assert bad.status_code == 401
        foreign = http.post(
            "/dashboard/login", data={"api_key": token}, headers={"Origin": "https://evil.example"}
        )
        assert foreign.status_code == 403
        ok = http.post("/dashboard/login", data={"api_key": token}, follow_redirects=False)
        assert ok.status_code == 303
        cookie = ok.headers["set-cookie"]
        assert "HttpOnly" in cookie and "SameSite=strict" in cookie.replace("Strict", "strict")
        session = {"Cookie": f"boundsvc_session={token}"}
        page = http.get("/dashboard", headers=session, follow_redirects=False)
        assert page.status_code == 200 and "lab-b" in page.text
        assert seeded.heat[0]["id"] not in page.text  # another project's certificates
        report = http.get(f"/v1/certificates/{seeded.heat[0]['id']}/report", headers=session)
        assert report.status_code == 404
        write = http.post("/v1/studies", json={"certificate_ids": ["x"]}, headers=session)
        assert write.status_code == 401  # the cookie is honoured on reads only
    finally:
        for key in store.list_api_keys("lab-b"):
            store.revoke_api_key(key.id)
        seeded.app.state.authenticator.invalidate()


def test_cli_report_writes_files_from_a_local_database(
    seeded: Seeded, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    from boundsvc.cli import main

    doc = seeded.vacuous
    url = seeded.app.state.settings.database_url
    out = tmp_path / "report"
    assert main(["report", doc["id"], "--database-url", url, "--out", str(out)]) == 0
    assert sorted(p.name for p in out.iterdir()) == sorted(
        ["report.html", "plot.png", "plot.svg", "certificate.json"]
    )
    html = (out / "report.html").read_text()
    assert "<style>" in html and 'src="plot.png"' in html and "/dashboard/static" not in html
    assert (out / "plot.png").read_bytes().startswith(PNG)
    assert json.loads((out / "certificate.json").read_text())["id"] == doc["id"]
    assert "written to" in capsys.readouterr().out
    assert main(["report", "crt_missing", "--database-url", url, "--out", str(out)]) == 1
    assert (
        main(
            [
                "report",
                doc["id"],
                "--database-url",
                url,
                "--project",
                "elsewhere",
                "--out",
                str(out),
            ]
        )
        == 1
    )


def test_cli_report_reads_from_the_service(
    seeded: Seeded, tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    from boundsvc.cli import _common, main

    monkeypatch.setattr(_common, "CLIENT_FACTORY", lambda args: client_of(seeded.app))
    doc = seeded.heat[0]
    out = tmp_path / "remote"
    assert main(["report", doc["id"], "--out", str(out), "--json"]) == 0
    assert f"{doc['bound']['l2_space_time']:.4g}" in (out / "report.html").read_text()
    assert main(["report", "crt_missing", "--out", str(out)]) == 1
