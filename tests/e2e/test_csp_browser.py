"""Every page of every role under the station's Content-Security-Policy in real Chromium:
no violation, no console error; and the policy does refuse inline code, on a page from the
station and on a tablet's saved copy of one."""

from __future__ import annotations

import re

import pytest
from playwright.sync_api import expect

from tests.conftest import DEMO_PASSWORDS
from tests.web.jobs import Job, functional_check_counted
from tests.web.test_roles import SAMPLE_ARGS
from webapp.web.headers import CONTENT_SECURITY_POLICY

from .conftest import log_in, wait_until
from .test_offline import PAGE_SAVED, WORKER_IN_CHARGE, Network

# Each violation the page sees, as the browser reports it (CSP 3 "securitypolicyviolation"
# event on the document; it bubbles from the element that broke the policy).
COLLECT_VIOLATIONS = """
window.__cspViolations = [];
document.addEventListener("securitypolicyviolation", (event) => {
  window.__cspViolations.push({directive: event.effectiveDirective, blocked: event.blockedURI,
                               sample: event.sample, source: event.sourceFile,
                               line: event.lineNumber});
});
"""
VIOLATIONS = "() => window.__cspViolations || []"
# Two turns of the event loop: a violation event queued while the page loaded has fired.
SETTLED = "() => new Promise((done) => setTimeout(() => setTimeout(done, 0), 0))"

FILE_NAME = re.compile(r"\.[a-z]+$")  # a URL ending in an extension names a file
PEOPLE = {"mech1": "mechanic", "super": "supervisor", "trainer": "trainer", "admin": "admin"}


@pytest.fixture
def jobs(station_api, station_clock):
    """A functional check worked up to its signatures (its review page previews the record
    with readings, counts and gates) and an exciter removal just opened on another engine
    (a mechanic's step page). Unsigned: the first signature's print would add 8 s, and the
    certify form's markup is checked in tests/web/test_headers.py."""
    mech1, mech2 = station_api("mech1"), station_api("mech2")
    check = functional_check_counted(mech1, mech2, station_api.db, station_clock)
    removal = Job(mech1, station_api.db, station_clock, "exciter-removal", engine=2)
    return [check.id, removal.id]


def sign_in(page, base_url: str, username: str) -> None:
    page.goto(f"{base_url}/login")
    page.fill("#username", username)
    page.fill("#password", DEMO_PASSWORDS[username])
    page.click("[data-testid=login]")
    page.wait_for_url(lambda url: "/login" not in url)


def pages_of(app, role: str | None, job_ids: list[int]) -> list[str]:
    """Every GET page the role may use (a stranger: the public ones), with sample
    arguments, each job route once per job. Not pages: the JSON API and files, whose URL
    names the file (record.pdf, sw.js, station-ca.pem ...): a browser saves those."""
    urls: list[str] = []
    for rule in app.url_map.iter_rules():
        view = app.view_functions[rule.endpoint]
        allowed = getattr(view, "allowed_roles", ())
        if rule.endpoint == "static" or "GET" not in rule.methods:
            continue
        if "anyone" not in allowed and role not in allowed:
            continue
        if rule.rule.startswith("/api/") or rule.rule == "/healthz" or FILE_NAME.search(rule.rule):
            continue
        if rule.endpoint.startswith("carry."):  # JSON: the steps a tablet carries
            continue
        for job_id in (job_ids if "job_id" in rule.arguments else [None]):
            url = rule.build({**SAMPLE_ARGS, "job_id": job_id}, append_unknown=False)[1]
            if url not in urls:
                urls.append(url)
    return urls


class Watched:
    """A page whose console errors, page errors and CSP violations are kept."""

    def __init__(self, context) -> None:
        context.add_init_script(COLLECT_VIOLATIONS)
        self.page = context.new_page()
        self.console: list[str] = []
        self.page.on("console", self._console)
        self.page.on("pageerror", lambda error: self.console.append(f"pageerror: {error}"))

    def _console(self, message) -> None:
        text = message.text
        policy_words = ("Content Security Policy", "Content-Security-Policy",
                        "Permissions-Policy")
        if message.type == "error" or any(word in text for word in policy_words):
            self.console.append(f"{message.type}: {text}")

    def visit(self, url: str) -> list[str]:
        """Open `url`; what went wrong on it (empty: nothing)."""
        before = len(self.console)
        answer = self.page.goto(url)  # returns once the page's "load" event has fired
        assert answer is not None and answer.status == 200, url
        assert answer.headers["content-type"].startswith("text/html"), url
        assert answer.headers.get("content-security-policy") == CONTENT_SECURITY_POLICY, url
        self.page.evaluate(SETTLED)
        found = [f"{url}: {v}" for v in self.page.evaluate(VIOLATIONS)]
        return found + [f"{url}: {line}" for line in self.console[before:]]


def test_every_page_of_every_role_keeps_the_policy(browser, live_server, app, jobs):
    problems: list[str] = []
    visited: dict[str, int] = {}
    for username in [*PEOPLE, None]:
        context = browser.new_context()
        watched = Watched(context)
        page = watched.page
        if username:
            sign_in(page, live_server, username)
        role = PEOPLE.get(username or "")
        visited[username or "stranger"] = 0
        for url in pages_of(app, role, jobs):
            problems += watched.visit(live_server + url)
            visited[username or "stranger"] += 1
        # htmx under the policy: configured by base.html's meta, it swaps without eval.
        assert page.evaluate("() => [htmx.config.includeIndicatorStyles, "
                             "htmx.config.allowEval, htmx.config.allowScriptTags]") == [
            False, False, False]
        context.close()
    assert problems == [], "\n".join(problems)
    # The rooms' pages, with the demo jobs' review, log and record preview among them.
    assert visited["mech1"] >= 10 and visited["super"] >= 15, visited
    assert visited["trainer"] >= 6 and visited["admin"] >= 5 and visited["stranger"] >= 3


def test_a_step_swapped_in_by_htmx_keeps_the_policy(browser, live_server, station_api):
    """A real htmx round trip (a tap, the station's fragment swapped in) raises nothing."""
    opened = station_api("mech1").post_json("/api/jobs", {"procedure": "exciter-removal",
                                                          "engine": 1, "channel": "A"})
    assert opened.status_code == 201
    job_id = opened.get_json()["id"]
    context = browser.new_context()
    watched = Watched(context)
    page = watched.page
    log_in(page, live_server, "mech1", "demo-mech1")
    assert watched.visit(f"{live_server}/jobs/{job_id}") == []
    step = page.get_by_test_id("step")
    first = step.get_attribute("data-step-id")
    page.click("[data-testid=done]")
    expect(step).not_to_have_attribute("data-step-id", first)
    page.evaluate(SETTLED)
    assert page.evaluate(VIOLATIONS) == [] and watched.console == []
    context.close()


def _inject_inline_code(page) -> None:
    page.evaluate("""() => document.body.insertAdjacentHTML("beforeend",
        '<img src="/static/icon.svg" alt="" onload="window.__inlineRan = true">' +
        '<p data-probe style="color: rgb(255, 0, 0)">probe</p>')""")


def _assert_refused(page, watched: Watched) -> None:
    wait_until(page, "() => window.__cspViolations.length >= 2", timeout_s=5)
    directives = sorted(v["directive"] for v in page.evaluate(VIOLATIONS))
    assert directives == ["script-src-attr", "style-src-attr"], directives
    assert page.evaluate("() => window.__inlineRan === undefined")
    assert page.evaluate("() => getComputedStyle(document.querySelector('[data-probe]'))"
                         ".color") != "rgb(255, 0, 0)"
    assert any("Content Security Policy" in line for line in watched.console), watched.console


def test_the_policy_refuses_inline_code_online_and_on_a_saved_copy(browser, live_server):
    """The checks above can fail: inline code put into a station page is refused and
    reported, and so it is on the copy the service worker serves when the Wi-Fi is gone
    (the worker keeps the station's headers; the Cache API kept the page despite no-store)."""
    context = browser.new_context()
    network = Network(context)
    watched = Watched(context)
    page = watched.page
    log_in(page, live_server, "mech1", "demo-mech1")
    _inject_inline_code(page)
    _assert_refused(page, watched)

    page.wait_for_function(WORKER_IN_CHARGE, polling=50)
    answer = page.reload()  # through the worker now, which keeps a copy of the page
    assert answer is not None and answer.headers["cache-control"] == "no-store"
    wait_until(page, PAGE_SAVED)
    network.cut()
    watched.console.clear()
    answer = page.reload()
    assert answer is not None and answer.from_service_worker
    assert answer.headers.get("content-security-policy") == CONTENT_SECURITY_POLICY
    expect(page.locator("meta[name=sparkward-saved-copy]")).to_have_count(1)
    _inject_inline_code(page)
    _assert_refused(page, watched)
    network.restore()
    context.close()
