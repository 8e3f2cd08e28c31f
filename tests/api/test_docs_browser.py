"""The /docs page in a real headless browser (Debian's chromium driven by playwright).

The app is served on a loopback port; the browser may fetch only from that server (every
other request is blocked and recorded, and none may be needed). Checked: the page loads
offline, every anchor of its table of contents (and every in-page link) resolves to an
element, every image loads, every example shown validates against its OpenAPI schema
(checked here with an independent JSON Schema validator) and every request example,
as shown on the page, gets the documented status when posted; a screenshot is taken at
1280 px. A problem page shows its failing request and fix.

Without chromium or the playwright package the module skips with one line saying what is
missing, unless CURVEWISE_REQUIRE_BROWSER=1 (CI, whose .ci/run installs chromium), where
it fails instead.
"""

from __future__ import annotations

import json
import os
import shutil
import struct
import threading
from urllib.parse import urlsplit

import pytest

CHROMIUM_FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic",
                  "--no-first-run", "--disable-background-networking",
                  "--disable-component-update", "--disable-sync"]
LOCAL_HOSTS = {"127.0.0.1", "localhost"}
pytestmark = pytest.mark.timeout(90)  # bounded: about 10 s here
WIDTH = 1280


def _chromium() -> tuple[str, str | None]:
    """Path of the chromium binary, and what is missing to run the browser (None: nothing)."""
    path = os.environ.get("CURVEWISE_CHROMIUM") or shutil.which("chromium") or "/usr/bin/chromium"
    if not os.path.isfile(path):
        return path, f"chromium not found at {path} (apt-get install chromium; .ci/run does)"
    try:
        import playwright.sync_api  # noqa: F401
    except ImportError:
        return path, "the playwright package is missing (pip install '.[test]')"
    return path, None


CHROMIUM, MISSING = _chromium()
REQUIRED = os.environ.get("CURVEWISE_REQUIRE_BROWSER") == "1"
if MISSING and not REQUIRED:  # the whole module skips with one line
    pytest.skip(f"browser test skipped: {MISSING}", allow_module_level=True)


@pytest.fixture(scope="module")
def server():
    """The app on a free loopback port (werkzeug's threaded server), for the module."""
    from werkzeug.serving import make_server

    from service.app import create_app

    httpd = make_server("127.0.0.1", 0, create_app({}), threaded=True)
    thread = threading.Thread(target=httpd.serve_forever, daemon=True)
    thread.start()
    yield f"http://127.0.0.1:{httpd.server_port}"
    httpd.shutdown()
    thread.join(5)


@pytest.fixture(scope="module")
def browser_page(tmp_path_factory):
    if MISSING:  # CURVEWISE_REQUIRE_BROWSER=1 (CI): each test fails, the rest of the suite runs
        pytest.fail(f"browser test required (CURVEWISE_REQUIRE_BROWSER=1) but {MISSING}",
                    pytrace=False)
    from playwright.sync_api import sync_playwright

    profile = tmp_path_factory.mktemp("chromium-profile")
    with sync_playwright() as driver:
        context = driver.chromium.launch_persistent_context(
            str(profile), executable_path=CHROMIUM, headless=True, args=CHROMIUM_FLAGS,
            viewport={"width": WIDTH, "height": 900}, timeout=20_000)
        blocked: list[str] = []

        def only_local(route):
            if urlsplit(route.request.url).hostname in LOCAL_HOSTS:
                route.continue_()
            else:
                blocked.append(route.request.url)
                route.abort()

        context.route("**/*", only_local)
        page = context.new_page()
        page.set_default_timeout(10_000)
        yield page, blocked
        context.close()


@pytest.fixture(scope="module")
def loaded(server, browser_page):
    page, blocked = browser_page
    response = page.goto(server + "/docs", wait_until="load")
    assert response.status == 200
    return page, blocked


def test_the_page_loads_offline_with_every_anchor_and_image(loaded, tmp_path):
    page, blocked = loaded
    assert blocked == [], f"the page asked for outside resources: {blocked}"
    toc = page.eval_on_selector_all("nav#contents a[href^='#']",
                                    "links => links.map(a => a.getAttribute('href').slice(1))")
    assert len(toc) > 20, toc  # every operation and every schema
    links = page.eval_on_selector_all("a[href^='#']",
                                      "links => links.map(a => a.getAttribute('href').slice(1))")
    unresolved = page.evaluate("ids => ids.filter(id => !document.getElementById(id))",
                               sorted(set(links)))
    assert unresolved == [], unresolved
    headings = page.eval_on_selector_all(
        "section[id^='op-'] h3", "hs => hs.map(h => h.textContent.replace(/\\s+/g, ' '))")
    assert headings[:5] == ["POST /v1/fit", "POST /v1/batch", "POST /v1/predict",
                            "POST /v1/invert", "POST /v1/plot"], headings
    assert all(h.startswith("GET ") for h in headings[5:]), headings
    page.locator("#op-post-v1-plot img").scroll_into_view_if_needed()
    page.wait_for_function("() => [...document.images].every(i => i.complete)")
    broken = page.eval_on_selector_all("img", "is => is.filter(i => !i.naturalWidth)"
                                              ".map(i => i.src)")
    assert broken == [], broken
    page.evaluate("window.scrollTo(0, 0)")
    shot = tmp_path / "docs-1280.png"
    page.screenshot(path=str(shot))
    width, height = struct.unpack(">II", shot.read_bytes()[16:24])  # the PNG IHDR chunk
    assert (width, height) == (WIDTH, 900)


def _shown_examples(page) -> list[dict]:
    return page.eval_on_selector_all(".example", """pres => pres.map(p => ({
        op: p.dataset.op, kind: p.dataset.kind, status: p.dataset.status || null,
        media: p.dataset.media, text: p.textContent}))""")


def test_every_example_on_the_page_validates_and_gets_its_status(loaded, server):
    import httpx
    import jsonschema_rs

    page, _ = loaded
    spec = httpx.get(server + "/openapi.json").json()
    shown = _shown_examples(page)
    operations = {f"{m} {p}" for p, ops in spec["paths"].items() for m in ops
                  if m in ("get", "post")}
    assert {e["op"] for e in shown if e["kind"] == "response"} == operations
    assert {e["op"] for e in shown if e["kind"] == "request"} == {
        op for op in operations if op.startswith("post ")}
    for example in shown:
        method, path = example["op"].split(" ", 1)
        operation = spec["paths"][path][method]
        if example["kind"] == "request":
            schema = operation["requestBody"]["content"][example["media"]]["schema"]
        else:
            schema = operation["responses"][example["status"]]["content"][example["media"]][
                "schema"]
        if example["media"].startswith("image/"):
            continue  # a figure: shown as an image, whose loading the first test checks
        value = json.loads(example["text"]) if "json" in example["media"] else example["text"]
        validator = jsonschema_rs.Draft202012Validator(
            {**schema, "components": spec["components"]})
        errors = [str(e)[:200] for e in validator.iter_errors(value)]
        assert not errors, (example["op"], example["kind"], errors[:3])
        if example["kind"] == "request":
            answer = httpx.post(server + path, json=value, timeout=30)
            documented = [e["status"] for e in shown
                          if e["op"] == example["op"] and e["kind"] == "response"]
            want = int(documented[0]) if documented else 200
            assert answer.status_code == want, (example["op"], answer.text[:300])


def test_every_curl_line_is_shown_and_names_a_served_example(loaded, server):
    import httpx

    page, _ = loaded
    lines = page.eval_on_selector_all("pre.curl", "ps => ps.map(p => p.textContent)")
    assert len(lines) == len(page.query_selector_all("section[id^='op-']"))
    for line in lines:  # the page names the server it is served from
        assert server + "/" in line and "127.0.0.1:8000" not in line, line
        for word in line.split():
            if word.startswith(server + "/docs/examples/"):
                fetched = httpx.get(word)
                assert fetched.status_code == 200, word


def test_a_problem_page_shows_a_failing_request_and_its_fix(server, browser_page):
    page, blocked = browser_page
    page.goto(server + "/problems/invalid_data", wait_until="load")
    assert page.locator("pre.failing").count() == 1
    assert page.locator("pre.fixed").count() == 1
    assert "Fix:" in page.inner_text("body")
    assert blocked == []
