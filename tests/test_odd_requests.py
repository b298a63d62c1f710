"""No page crashes: a position with no device installed, odd values in query strings and odd ids in URLs.

The parameter names tried are not a hand-kept list: they are read from the links and GET forms of every page the
URL configuration gives, and from the source of each view's module (request.GET.get("name"), query_id(request,
"name")), so a view that starts reading a new parameter is tried too.
"""
import inspect
import re
from html.parser import HTMLParser
from urllib.parse import parse_qsl, urljoin, urlsplit

import pytest
from django.contrib.auth.models import Permission, User
from django.test import Client
from django.urls import resolve
from django.urls.exceptions import Resolver404

from plant import params, risk
from plant.models import Position
from tests.helpers import user_with_role
from tests.helpers import url_patterns

ODD_VALUES = ["²", "99999999999999999999", "-1", "x", ""]  # more shapes of odd ids: test_an_id_is_ascii_digits...
ODD_IDS = ["99999999999999999999", "9223372036854775808", "0"]


# A position with no device installed (FT-115 in the demo) ----------------------------------------------------
@pytest.mark.parametrize("role", ["technician", "reviewer", "administrator"])
def test_a_vacant_position_shows_its_duty_findings_history_and_install(demo_plant, role):
    client = Client()
    client.force_login(user_with_role(role))
    response = client.get("/positions/FT-115/")
    assert response.status_code == 200
    page = response.content.decode()
    assert "no device installed" in page and "Pickling brine" in page  # the position and its duty
    # installation history: the device that served here and why it came out
    history = page.split('id="position-moves"')[1].split("</table>")[0]
    assert "SN853027" in history and "moved to the syrup kitchen" in history
    assert 'href="/positions/FT-115/swap/">Install a device<' in page
    # the findings depend on the device's principle: each principle is shown with what it would meet here
    table = page.split('id="findings-by-principle"')[1].split("</table>")[0]
    assert table.count("<tr") == 1 + len(risk.PRINCIPLES)
    assert "Chlorides attack the electrodes" in table and "(the last device here)" in table
    assert "Thermal mass meter on a liquid" in table


def test_the_findings_by_principle_are_those_of_the_risk_rules_least_affected_first(demo_plant):
    position = Position.objects.get(tag="FT-115")
    rows = position.assess_each_principle()
    assert sorted(p for p, _ in rows) == sorted(risk.PRINCIPLES)
    for principle, findings in rows:
        assert findings == position.assess(principle, "")
    factors = [risk.interval_factor(findings) for _, findings in rows]
    assert factors == sorted(factors, reverse=True)
    assert rows[-1][0] == "thermal_mass"  # a thermal mass meter on a liquid brine: not fit (factor 0.25)


def test_a_reader_who_may_not_install_gets_no_install_action(demo_plant):
    reader = User.objects.create_user("reader", password="pw")
    reader.user_permissions.add(*Permission.objects.filter(codename__in=["view_device", "view_position"]))
    client = Client()
    client.force_login(reader)
    page = client.get("/positions/FT-115/").content.decode()
    assert "Pickling brine" in page and "/positions/FT-115/swap/" not in page


# Odd ids and query values --------------------------------------------------------------------------------------
@pytest.mark.parametrize("text, expected", [
    ("1", 1), ("042", 42), (str(params.MAX_ID), params.MAX_ID), (str(params.MAX_ID + 1), None), ("0", None),
    ("²", None), ("٣", None), ("-1", None), ("+1", None), ("1_0", None), (" 1", None), ("", None), (None, None),
    ("1" * 20, None), ("1.0", None)])
def test_an_id_is_ascii_digits_within_the_id_columns(text, expected):
    assert params.parse_id(text) == expected


class _Links(HTMLParser):
    def __init__(self, base):
        super().__init__()
        self.base, self.urls, self.forms = base, [], []

    def handle_starttag(self, name, attrs):
        attrs = dict(attrs)
        if name == "a" and attrs.get("href"):
            self.urls.append(urljoin(self.base, attrs["href"]))
        elif name == "form" and (attrs.get("method") or "get").lower() == "get":
            self.forms.append([urljoin(self.base, attrs.get("action") or self.base), set()])
        elif name in ("input", "select", "textarea") and self.forms and attrs.get("name"):
            self.forms[-1][1].add(attrs["name"])


def parameters_by_view(client, urls):
    """{view name: (a URL of it, the query parameter names its links and GET forms use)} over the pages given."""
    found = {}
    for url in urls:
        response = client.get(url)
        if response.status_code != 200 or not response["Content-Type"].startswith("text/html"):
            continue
        parser = _Links("http://testserver" + url)
        parser.feed(response.content.decode())
        pairs = [(u, {k for k, _ in parse_qsl(urlsplit(u).query, keep_blank_values=True)}) for u in parser.urls]
        pairs += [(action, names) for action, names in parser.forms]
        for target, names in pairs:
            parts = urlsplit(target)
            if parts.netloc != "testserver":
                continue
            try:
                match = resolve(parts.path)
            except Resolver404:
                continue
            found.setdefault(match.view_name, (parts.path, names_read_in(match.func)))[1].update(names)
    return found


_READS = re.compile(r"""(?:GET\.get(?:list)?\(|GET\[|query_id\(request,\s*)\s*["'](\w+)["']""")


def names_read_in(view):
    """Query parameter names the source of the view's module reads by name."""
    return set(_READS.findall(inspect.getsource(inspect.getmodule(inspect.unwrap(view)))))


def test_odd_query_values_give_400_or_are_ignored(demo_plant):
    client = Client()
    client.force_login(user_with_role("administrator"))
    fill = {"tag": "FT-204", "token": "x"}
    urls = ["/" + re.sub(r"<(?:(\w+):)?(\w+)>", lambda m: fill.get(m.group(2), "1"), route)
            for route, _ in url_patterns()]
    found = parameters_by_view(client, urls)
    # the pages link to their filters: these at least must have been found (the ones that crashed are among them)
    assert {"site", "area"} <= found["offline:home"][1], found.get("offline:home")
    assert "task" in found["plant:position-maintain"][1] and "by" in found["reports:stats-csv"][1]
    assert "export" in found["reports:review"][1] and "overdue-page" in found["reports:review"][1]
    found["offline:kit"] = ("/field/kit.json", found["offline:home"][1])  # the tablet script asks with the same
    failures, tried = [], 0
    for view, (path, names) in sorted(found.items()):
        # a sortable table also reads its page number and, unless told otherwise, a page size
        tables = {name[: -len("sort")] for name in names if name.endswith("sort")}
        for name in sorted(names | {prefix + part for prefix in tables for part in ("page", "per_page")}):
            for value in ODD_VALUES:
                response = client.get(path, {name: value})
                tried += 1
                if response.status_code >= 500:
                    failures.append(f"{path}?{name}={value!r}: {response.status_code}")
    assert tried > 200
    assert failures == []


def test_the_page_size_is_ours_and_an_odd_page_number_shows_a_page(demo_plant, client):
    for query in ({"per_page": "-1"}, {"per_page": "0"}, {"per_page": "100000"}, {"page": "²"}, {"page": "99999"}):
        response = client.get("/positions/", query)
        assert response.status_code == 200, query
        table = response.context["table"]
        assert table.paginator.per_page == 50 and len(table.page.object_list) == 44, query  # 44 installed
    for page, shown in (("99999", "last"), ("99999999999999999999", "first"), ("-2", "first")):
        response = client.get("/review/", {"overdue-per_page": "-5", "overdue-page": page})
        assert response.status_code == 200
        overdue = next(table for bucket, table in response.context["buckets"] if bucket.key == "overdue")
        assert overdue.paginator.per_page == 10 and overdue.paginator.num_pages > 1
        assert overdue.page.number == (1 if shown == "first" else overdue.paginator.num_pages), page


def test_the_offline_filters_ignore_what_is_not_an_id(demo_plant):
    client = Client()
    client.force_login(user_with_role("technician"))
    everything = client.get("/field/kit.json").json()["pages"]
    for value in ("²", "99999999999999999999", "-3"):
        assert client.get("/field/", {"site": value}).status_code == 200
        assert client.get("/field/kit.json", {"area": value}).json()["pages"] == everything


def test_odd_ids_in_every_url_are_not_found(demo_plant, client):
    tried = 0
    for route, _ in url_patterns():
        if "<id:" not in route:
            continue
        for odd in ODD_IDS:
            url = "/" + re.sub(r"<(?:(\w+):)?(\w+)>", lambda m: odd if m.group(1) == "id" else "x", route)
            response = client.get(url)
            tried += 1
            assert response.status_code in (404, 405), (url, response.status_code)
    assert tried >= 3 * 12
