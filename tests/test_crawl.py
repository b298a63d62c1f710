"""Every page a user can reach opens: the demo plant crawled as technician, reviewer and administrator.

Breadth-first from the start page, GET only, following every same-site link (<a href>, the action of a GET form,
a redirect); a POST form is never submitted. Long lists are sampled: at most the first three links of each kind,
the kind being the URL pattern the link resolves to (django.urls.resolve), counted per list they stand in (the
kind of page and the id, digits aside, of the nearest enclosing element that has one). Sampled over the whole crawl instead, the
register's first three positions would use up the position pages, and the review's list of positions with no
device installed, whose page once crashed, would never be opened. Django's admin pages are sampled over the whole
crawl (their lists are the admin's own, alike on every page). Files (PDF, ZIP, CSV, XLSX, JSON,
iCalendar) are fetched like pages but not read for links. The crawl fails on any 5xx and lists every failing
URL with the role and status; then on any 4xx (a dead link, or a link shown to a role that may not follow it: the
review once offered reviewers "Calibrate (bench)"). A GET changes nothing: the row counts of every table are the
same afterwards.
"""
import re
import time
from collections import Counter, deque
from html.parser import HTMLParser
from urllib.parse import urljoin, urlsplit

import pytest
from django.apps import apps
from django.test import Client
from django.urls import Resolver404, resolve

from tests.helpers import user_with_role

SAMPLE_PER_KIND = 3
ROLES = ["technician", "reviewer", "administrator"]


VOID = {"area", "base", "br", "col", "embed", "hr", "img", "input", "link", "meta", "source", "track", "wbr"}


class _Links(HTMLParser):
    """(href, id of the nearest enclosing element with an id) of every link and GET form action."""

    def __init__(self):
        super().__init__()
        self.found, self.open = [], []

    def handle_starttag(self, name, attrs):
        attrs = dict(attrs)
        where = next((i for _, i in reversed(self.open) if i), "")
        if name == "a" and attrs.get("href"):
            self.found.append((attrs["href"], where))
        elif name == "form" and (attrs.get("method") or "get").lower() == "get":
            self.found.append((attrs.get("action") or "", where))
        if name not in VOID:
            # one row's id (task-12) names a row of a list, not a list of its own
            self.open.append((name, re.sub(r"\d+", "#", attrs.get("id") or "")))

    def handle_endtag(self, name):
        for depth in range(len(self.open) - 1, -1, -1):
            if self.open[depth][0] == name:
                del self.open[depth:]
                break


def kind_of(path):
    try:
        return resolve(path).view_name
    except Resolver404:
        return "(no URL pattern)"


def crawl(client, role):
    """(pages visited, [(role, url, status)] for every 4xx and 5xx, Counter of statuses)."""
    queue, queued, per_kind = deque(["/"]), {"/"}, Counter()
    failures, statuses, visited = [], Counter(), 0

    def follow(href, base, where=""):
        if href.startswith(("mailto:", "javascript:", "data:", "tel:")):
            return
        parts = urlsplit(urljoin("http://testserver" + base, href))
        if parts.scheme not in ("http", "https") or parts.netloc != "testserver":
            return  # another site
        url = parts.path + ("?" + parts.query if parts.query else "")
        if url in queued:
            return
        target = kind_of(parts.path)
        # Django's admin pages are sampled over the whole crawl: their lists are the admin's own, page after page
        kind = target if target.startswith("admin:") else (target, kind_of(urlsplit(base).path), where)
        if per_kind[kind] >= SAMPLE_PER_KIND:
            return
        per_kind[kind] += 1
        queued.add(url)
        queue.append(url)

    while queue:
        url = queue.popleft()
        response = client.get(url)
        visited += 1
        statuses[response.status_code] += 1
        if response.status_code >= 400:
            failures.append((role, url, response.status_code))
        if response.status_code in (301, 302, 303, 307, 308):
            follow(response["Location"], url)
        elif response.get("Content-Type", "").startswith("text/html"):
            parser = _Links()
            parser.feed(response.content.decode())
            for href, where in parser.found:
                follow(href, url, where)
    return visited, failures, statuses


def row_counts():
    return {model._meta.label: model._default_manager.count() for model in apps.get_models()
            if model._meta.app_label not in ("sessions", "axes")}


@pytest.mark.django_db
def test_every_page_reached_from_the_start_page_opens_for_every_role(demo_maintenance, capsys):
    clients = {}
    for role in ROLES:
        clients[role] = Client(raise_request_exception=False)
        clients[role].force_login(user_with_role(role, f"crawl-{role}"))
    before = row_counts()
    failures, lines = [], []
    for role in ROLES:
        started = time.perf_counter()
        visited, failed, statuses = crawl(clients[role], role)
        failures += failed
        lines.append(f"crawl as {role}: {visited} pages in {time.perf_counter() - started:.1f} s, "
                     f"statuses {dict(sorted(statuses.items()))}")
        assert visited > 30, lines[-1]
    with capsys.disabled():
        print("\n" + "\n".join(lines))
    listed = "\n".join(f"{role} {url} {status}" for role, url, status in failures)
    assert [f for f in failures if f[2] >= 500] == [], listed
    assert failures == [], listed
    assert row_counts() == before  # no link changed anything
