"""Weekly review: each bucket against a hand-built fleet whose answers are known; constant query count."""
import datetime as dt
import io

import pytest
from django.utils import timezone

from calibration.models import CalibrationEvent, ReferenceStandard
from plant import risk
from plant.models import Area, Fluid, Device, Position, Site
from tests.helpers import export, make_meter

pytestmark = pytest.mark.django_db


@pytest.fixture
def fleet():
    today = timezone.localdate()
    site = Site.objects.create(name="Review site")
    area = Area.objects.create(site=site, name="Hall")
    water = Fluid.objects.create(name="Water", phase="liquid", conductivity_us_cm=400)
    oil = Fluid.objects.create(name="Oil", phase="liquid", conductivity_us_cm=0.0001, viscosity_mpa_s=50,
                               density_kg_m3=900)
    d = dt.timedelta
    make_meter("OVERDUE-1", area, water, next_due_date=today - d(days=10), last_calibrated=today - d(days=375))
    make_meter("NEVER-1", area, water)  # never calibrated: overdue now
    make_meter("DUE-1", area, water, next_due_date=today + d(days=5), last_calibrated=today - d(days=360))
    make_meter("LATER-1", area, water, next_due_date=today + d(days=100), last_calibrated=today - d(days=200))
    make_meter("DRIFT-1", area, water, next_due_date=today + d(days=200), predicted_crossing=today + d(days=90),
               drift_status="drifting")
    # the latest verdict is stored on the meter by the due-date recompute (tested in test_due_dates.py)
    failed = make_meter("FAILED-1", area, water, next_due_date=today + d(days=60), last_in_tolerance=False)
    CalibrationEvent.objects.create(device=failed, performed_on=today - d(days=400), technician="T", procedure="p",
                                    state="signed", as_found_in_tolerance=True)
    CalibrationEvent.objects.create(device=failed, performed_on=today - d(days=30), technician="T", procedure="p",
                                    state="signed", as_found_in_tolerance=False)
    recovered = make_meter("RECOVERED-1", area, water, next_due_date=today + d(days=300), last_in_tolerance=True)
    CalibrationEvent.objects.create(device=recovered, performed_on=today - d(days=400), technician="T", procedure="p",
                                    state="signed", as_found_in_tolerance=False)
    CalibrationEvent.objects.create(device=recovered, performed_on=today - d(days=30), technician="T", procedure="p",
                                    state="signed", as_found_in_tolerance=True)
    make_meter("MISAPPLIED-1", area, oil, next_due_date=today + d(days=300))
    spare = make_meter("SPARE-1", area, water, next_due_date=today - d(days=50))
    Device.objects.filter(pk=spare.pk).update(status="spare")
    CalibrationEvent.objects.create(device=make_meter("DRAFT-1", area, water, next_due_date=today + d(days=300)),
                                    performed_on=today, technician="T", procedure="p")
    ReferenceStandard.objects.create(identification="RS-OLD", description="expired", range_max=10,
                                     certificate_number="X", due_date=today - d(days=1), expanded_uncertainty=0.1)
    ReferenceStandard.objects.create(identification="RS-SOON", description="soon", range_max=10,
                                     certificate_number="Y", due_date=today + d(days=10), expanded_uncertainty=0.1)
    ReferenceStandard.objects.create(identification="RS-OK", description="fine", range_max=10,
                                     certificate_number="Z", due_date=today + d(days=200), expanded_uncertainty=0.1)
    return today


def tags(client, key, **params):
    header, rows = export(client, key, **params)
    return sorted(r[0] for r in rows)


def test_buckets_hold_exactly_the_known_meters(client, fleet):
    assert tags(client, "overdue") == ["NEVER-1", "OVERDUE-1"]  # the spare is not in service
    assert tags(client, "due") == ["DUE-1"]
    assert tags(client, "drifting") == ["DRIFT-1"]
    assert tags(client, "failed") == ["FAILED-1"]  # only the latest verdict counts
    assert tags(client, "risk") == ["MISAPPLIED-1"]
    assert tags(client, "standards") == ["RS-OLD", "RS-SOON"]
    header, rows = export(client, "drafts")
    assert [r[0] for r in rows] == ["DRAFT-1"]


def test_look_ahead_parameter(client, fleet):
    assert tags(client, "due", days=120) == ["DUE-1", "FAILED-1", "LATER-1"]
    assert tags(client, "standards", days=5) == ["RS-OLD"]


def test_days_overdue_and_counts_on_page(client, fleet):
    header, rows = export(client, "overdue")
    overdue = {r[0]: r[header.index("Days overdue")] for r in rows}
    assert overdue["OVERDUE-1"] == "10"
    body = client.get("/review/").content.decode()
    assert 'id="count-overdue">2<' in body and 'id="count-risk">1<' in body


def test_filters_and_bad_parameters(client, fleet):
    oil = Fluid.objects.get(name="Oil")
    assert tags(client, "risk", fluid=oil.pk) == ["MISAPPLIED-1"]
    assert tags(client, "overdue", fluid=oil.pk) == []
    assert tags(client, "overdue", principle="coriolis") == []
    response = client.get("/review/", {"days": "-3"})
    assert response.status_code == 400 and "Look ahead at least one day." in response.content.decode()
    assert client.get("/review/", {"export": "nope"}).status_code == 400


def test_sortable(client, fleet):
    body = client.get("/review/", {"overdue-sort": "-tag"}).content.decode()
    assert body.index("OVERDUE-1") < body.index("NEVER-1")


def _grow(n, area, fluid):
    for i in range(n):
        make_meter(f"EXTRA-{i}", area, fluid, next_due_date=timezone.localdate() - dt.timedelta(days=i + 1))


def test_query_count_does_not_grow_with_fleet(client, fleet, django_assert_max_num_queries):
    from django.db import connection
    from django.test.utils import CaptureQueriesContext

    with CaptureQueriesContext(connection) as small:
        assert client.get("/review/").status_code == 200
    _grow(150, Area.objects.get(), Fluid.objects.get(name="Water"))
    with django_assert_max_num_queries(len(small.captured_queries)):
        assert client.get("/review/").status_code == 200
    # a fixed set: counts, then each list's page in two reads (its ids from the indexes, then those rows)
    # and one to know whether the plant has one site (its column then left out)
    assert len(small.captured_queries) <= 33


@pytest.mark.parametrize("sort", [None, "tag", "-tag", "site", "-next_due_date", "serial", "-principle"])
def test_pages_read_in_two_steps_match_the_list_in_its_order(client, fleet, sort):
    """Every review list, page by page and in each sort order, holds exactly the rows of the list itself."""
    from django.test import RequestFactory
    from django_tables2 import RequestConfig

    from reports import review
    from reports.review_views import CountedPaginator

    _grow(23, Area.objects.get(), Fluid.objects.get(name="Water"))
    for bucket in review.build({}):
        seen = []
        for number in range(1, 30):
            query = {f"{bucket.key}-page": number}
            if sort:
                query[f"{bucket.key}-sort"] = sort
            table = bucket.table_class(bucket.rows, prefix=f"{bucket.key}-")
            if sort and sort.lstrip("-") not in table.columns.names():
                query.pop(f"{bucket.key}-sort")
            RequestConfig(RequestFactory().get("/review/", query),
                          paginate={"per_page": 10, "paginator_class": CountedPaginator,
                                    "known_count": bucket.count}).configure(table)
            page = [row.record.pk for row in table.paginated_rows]
            # the list as the table orders it, equal values in the sorted column taken in register order
            listed = table.data.data
            whole = [record.pk for record in listed.order_by(*(listed.query.order_by or listed.model._meta.ordering),
                                                             "pk")]
            assert page == whole[(number - 1) * 10:number * 10], (bucket.key, sort, number)
            seen += page
            if number == table.paginator.num_pages:
                break
        assert len(seen) == len(set(seen)) == bucket.count, bucket.key


class _Tables(__import__("html.parser").parser.HTMLParser):
    """The text of every <table> on a page, row by row (header row first)."""

    def __init__(self):
        super().__init__()
        self.tables, self._cell = [], None

    def handle_starttag(self, tag, attrs):
        if tag == "table":
            self.tables.append([])
        elif tag == "tr" and self.tables:
            self.tables[-1].append([])
        elif tag in ("td", "th"):
            self._cell = []

    def handle_endtag(self, tag):
        if tag in ("td", "th") and self._cell is not None:
            self.tables[-1][-1].append(" ".join("".join(self._cell).split()))
            self._cell = None

    def handle_data(self, data):
        if self._cell is not None:
            self._cell.append(data)


WORDS_ON_PAGE = {  # issue 15 item 9: risk codes in plain words on pages, kept as codes in exports
    ("risk", "Severity"): lambda code: risk.SEVERITY_WORDS[code],
    # on the page each row's reasons fold under its findings ("Why"), the reasons column being left out there
    ("risk", "Findings"): lambda codes: "; ".join(dict.fromkeys(risk.TITLES[c] for c in codes.split(", "))),
    ("risk", "Recommendation"): lambda text: text or "—",
}


def test_csv_export_read_with_pandas_equals_the_table_on_the_page(client, fleet):
    import pandas as pd

    page = _Tables()
    page.feed(client.get("/review/").content.decode())
    # maintenance: the tasks derived when the meters were registered are due today, none overdue (no table)
    keys = ["risk", "overdue", "failed", "due", "drifting", "standards", "drafts", "maint_due"]  # in review.ORDER
    assert len(page.tables) == len(keys)
    for key, shown in zip(keys, page.tables):
        exported = pd.read_csv(io.BytesIO(client.get("/review/", {"export": key}).content), dtype=str,
                               keep_default_na=False)
        header, rows = shown[0], [r for r in shown[1:] if r]
        # the page leaves out the site (one site in the plant: the same in every row) and, to fit 820 px, the
        # columns its table names; the CSV keeps them all, in the same order
        from reports import review

        bucket = next(b for b in review.build({}) if b.key == key)
        whole = bucket.table_class(bucket.rows)
        left_out = {str(whole.columns[name].header) for name in getattr(bucket.table_class, "page_exclude", ())
                    } | {"Site"}
        assert [c for c in exported.columns if c not in left_out] == header, key
        exported = exported[header]
        if rows and rows[0][0].startswith("No "):  # the empty-table message
            rows = []
        on_page = pd.DataFrame(rows, columns=header)
        exported = exported.head(10)  # the page shows the first 10 of a list, the CSV all of it
        for column in header:  # the page shows dates and empty values the way the CSV writes them
            if (key, column) in WORDS_ON_PAGE:  # codes in the export, the same in plain words on the page
                to_words = WORDS_ON_PAGE[key, column]
                page_text = [v.partition("Why")[0] for v in on_page[column]]
                assert [to_words(v) for v in exported[column]] == page_text, (key, column)
                continue
            assert exported[column].str.replace("—", "").tolist() == on_page[column].str.replace("—", "").tolist(), \
                (key, column)


def test_misapplied_row_says_not_fit_beside_the_shortened_interval(client, fleet):
    # Common practice (plant/risk.py): an electromagnetic meter on oil (0.0001 µS/cm, below ~5 µS/cm) is not fit
    # for the duty, factor 0.25; by hand 365 d × 0.25 = 91.25 d -> 91 d.
    page = _Tables()
    page.feed(client.get("/review/").content.decode())
    risk_table = page.tables[0]  # the first list: not fit for duty
    header, row = risk_table[0], risk_table[1]
    shown = dict(zip(header, row))
    assert shown["Tag"] == "MISAPPLIED-1"
    assert shown["Severity"] == "not fit for this duty"
    findings, _, why = shown["Findings"].partition("Why")  # the reasons fold under the findings on the page
    assert findings == "Liquid too poorly conductive for a magnetic meter"
    assert why.startswith("Conductivity 0.0001 µS/cm is below the usual minimum of about 5 µS/cm")
    assert shown["Risk interval"] == "91 d (365 d × 0.25)"
    assert shown["Recommendation"] == "Not fit for this duty: replace or re-engineer"
    header, rows = export(client, "risk")
    exported = dict(zip(header, rows[0]))
    assert (exported["Severity"], exported["Findings"]) == ("misapplied", "EM_LOW_CONDUCTIVITY")  # codes kept


def test_today_is_the_sites_date_not_utc(client, fleet, monkeypatch):
    # Issue 17 item 8. At 2026-12-04 23:30 UTC it is already 2026-12-05 12:30 in Auckland (NZDT, UTC+13 in
    # December; IANA time zone database): a meter due on 2026-12-04 there is overdue by 1 day, in UTC not yet.
    from django.utils import timezone as django_timezone

    monkeypatch.setattr(django_timezone, "now", lambda: dt.datetime(2026, 12, 4, 23, 30, tzinfo=dt.timezone.utc))
    site = Site.objects.get()
    device = Device.objects.get(position__tag="LATER-1")
    Device.objects.filter(pk=device.pk).update(next_due_date=dt.date(2026, 12, 4))
    Device.objects.exclude(pk=device.pk).update(next_due_date=dt.date(2027, 6, 1))
    assert "LATER-1" not in tags(client, "overdue")  # the site has no zone: the plant's (UTC here) 2026-12-04
    site.time_zone = "Pacific/Auckland"
    site.full_clean()
    site.save()
    assert tags(client, "overdue") == ["LATER-1"]
    header, rows = export(client, "overdue")
    assert dict(zip(header, rows[0]))["Days overdue"] == "1"
    # a second site west of UTC (Chicago, UTC-6: still 2026-12-04 17:30) keeps its own date in the same list
    west = Site.objects.create(name="West site", time_zone="America/Chicago")
    Position.objects.filter(tag="DUE-1").update(area=Area.objects.create(site=west, name="Yard"))
    Device.objects.filter(position__tag="DUE-1").update(next_due_date=dt.date(2026, 12, 4))
    assert tags(client, "overdue") == ["LATER-1"]
    assert "DUE-1" in tags(client, "due")


def _section_order(body):
    import re

    return re.findall(r'<section id="([a-z_]+)">', body), re.findall(r'id="count-([a-z_]+)"', body)


def test_lists_and_tiles_in_order_of_consequence(client, fleet):
    """Issue 27 item 5: not fit for duty, overdue, last failed, due soon, drifting, then the rest; the tiles in the
    same order as the lists, each with its severity in words (not colour alone)."""
    body = client.get("/review/").content.decode()
    sections, tiles = _section_order(body)
    assert sections == tiles
    assert sections[:5] == ["risk", "overdue", "failed", "due", "drifting"]
    assert set(sections) == {"risk", "overdue", "failed", "due", "drifting", "pfa_above", "low_pc", "standards",
                             "spares", "vacant", "drafts", "maint_overdue", "maint_due"}
    assert body.count('<span class="urgency">Act now</span>') == 2  # the two tiles of the first lists
    assert '<span class="urgency">Act now:</span> Not fit for duty' in body


def test_overdue_lists_the_most_overdue_first(client, fleet):
    """Days overdue descending by default (never calibrated first: it has no calibration at all); the CSV too."""
    water, area = Fluid.objects.get(name="Water"), Area.objects.get()
    today = timezone.localdate()
    for tag, days in (("A-3", 3), ("Z-400", 400), ("M-40", 40)):
        make_meter(tag, area, water, next_due_date=today - dt.timedelta(days=days))
    header, rows = export(client, "overdue")
    assert [r[0] for r in rows] == ["NEVER-1", "Z-400", "M-40", "OVERDUE-1", "A-3"]
    shown = [int(r[header.index("Days overdue")]) for r in rows[1:]]
    assert shown == sorted(shown, reverse=True) == [400, 40, 10, 3]
    body = client.get("/review/").content.decode()
    section = body[body.index('<section id="overdue">'):]
    assert section.index("Z-400") < section.index("M-40") < section.index("OVERDUE-1") < section.index("A-3")
    # sorting by the column: fewest days overdue first, never calibrated last
    body = client.get("/review/", {"overdue-sort": "days_overdue"}).content.decode()
    section = body[body.index('<section id="overdue">'):body.index("</section>", body.index('<section id="overdue">'))]
    assert section.index("A-3") < section.index("OVERDUE-1") < section.index("Z-400") < section.index("NEVER-1")


def test_site_column_only_where_sites_differ(client, fleet):
    """One site in scope (the plant's only site, or a site or area chosen): its name would repeat in every row, so
    the page leaves the column out; two sites unfiltered: the column is shown. The CSV keeps it always."""
    def overdue_header(**params):
        page = _Tables()
        body = client.get("/review/", params).content.decode()
        page.feed(body[body.index('<section id="overdue">'):])
        return page.tables[0][0]

    assert "Site" not in overdue_header()
    other = Site.objects.create(name="Second site")
    make_meter("OTHER-1", Area.objects.create(site=other, name="Yard"), Fluid.objects.get(name="Water"),
               next_due_date=timezone.localdate() - dt.timedelta(days=2))
    assert "Site" in overdue_header()
    assert "Site" not in overdue_header(site=other.pk)
    header, rows = export(client, "overdue", site=other.pk)
    assert "Site" in header and [r[header.index("Site")] for r in rows] == ["Second site"]


def test_chloride_findings_do_not_call_every_chloride_fluid_brine(client):
    """Issue 27 item 5: a cooling-tower water finding read "Brine (chlorides) pits stainless electrodes". The
    chloride findings name the chlorides, which is what cooling-tower water and brine have in common
    (plant/risk.py, common practice); the review's risk list shows the words."""
    from maintenance import tasks

    tower = risk.FluidProps(phase="liquid", conductivity_us_cm=2000, chlorides=True)
    for principle in risk.PRINCIPLES:
        for finding in risk.assess(principle, "316L", tower):
            assert "brine" not in finding.reason.lower() and "brine" not in finding.title.lower(), finding
    electrode = next(f for f in risk.assess("electromagnetic", "316L", tower) if f.code == "EM_CHLORIDES")
    assert electrode.reason.startswith("Chlorides in the fluid pit stainless electrodes")
    assert tasks.CATALOGUE["CHLORIDE_PITTING_INSPECTION"].reason.startswith("Chlorides (brine, cooling-tower water)")
    site = Site.objects.create(name="Utilities site")
    area = Area.objects.create(site=site, name="Cooling")
    water = Fluid.objects.create(name="Cooling tower water", phase="liquid", conductivity_us_cm=2000, chlorides=True)
    make_meter("FT-CT1", area, water)
    body = client.get("/review/").content.decode()
    section = body[body.index('<section id="risk">'):body.index("</section>", body.index('<section id="risk">'))]
    assert "FT-CT1" in section and "Chlorides in the fluid pit stainless electrodes" in section
    assert "Brine" not in section
