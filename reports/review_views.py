from django.contrib.auth.decorators import permission_required
from django.core.paginator import Paginator
from django.http import HttpResponse
from django.shortcuts import render
from django.utils.functional import cached_property
from django.db.models import QuerySet
from django_tables2.rows import BoundRows

from ledger.models import VerificationRun
from plant import spreadsheet
from plant.params import configure_table
from reports import review
from reports.forms import ReviewFilterForm


class CountedPaginator(Paginator):
    """A paginator told its count (the review counts all its lists in one query beforehand) that reads a page
    in two steps: the page's ids in the list's order, then those rows whole.

    Sorting every matching row with all its columns (and the tables it is joined to) only to keep ten is what
    made the page slow at 20,000 devices; the ids come from the review indexes alone.
    """

    def __init__(self, object_list, per_page, known_count=None, **kwargs):
        super().__init__(object_list, per_page, **kwargs)
        self.known_count = known_count

    @cached_property
    def count(self):
        return super().count if self.known_count is None else self.known_count

    def page(self, number):
        number = self.validate_number(number)
        bottom = (number - 1) * self.per_page
        top = bottom + self.per_page
        if top + self.orphans >= self.count:
            top = self.count
        rows = self.object_list  # the table's BoundRows
        queryset = getattr(rows.data, "data", None)
        if not isinstance(queryset, QuerySet):
            return super().page(number)
        records = review.page_of(queryset, bottom, top)
        return self._get_page(BoundRows(records, table=rows.table, pinned_data=rows.pinned_data), number, self)


def _buckets(request):
    form = ReviewFilterForm(request.GET or None)
    if form.is_bound and form.is_valid():
        filters, days = form.filters(), form.cleaned_data.get("days") or 14
    else:
        filters, days = {}, 14
    return form, review.build(filters, days=days), days, filters


@permission_required("calibration.view_review", raise_exception=True)
def weekly_review(request):
    form, buckets, days, filters = _buckets(request)
    export = request.GET.get("export")
    if export:
        return _csv(buckets, export)
    shown = []
    # the spares' "Calibrate (bench)" only for those who may calibrate (a reviewer followed it to a 403)
    hidden = () if request.user.has_perm("calibration.add_calibrationevent") else ("calibrate",)
    if review.single_site(filters):
        hidden += ("site",)  # the same in every row: the columns left fit a tablet's 820 px
    for bucket in buckets:
        table = bucket.table_class(bucket.rows, prefix=f"{bucket.key}-",
                                   exclude=hidden + getattr(bucket.table_class, "page_exclude", ()))
        configure_table(request, table, per_page=10, paginator_class=CountedPaginator, known_count=bucket.count)
        shown.append((bucket, table))
    status = 400 if form.is_bound and not form.is_valid() else 200
    # the last run of `manage.py verify_records` (or of a restore): a failure is shown above every list
    verification = VerificationRun.objects.order_by("-at", "-id").first()
    return render(request, "reports/review.html", {
        "form": form, "buckets": shown, "days": days,
        "failed_verification": verification if verification is not None and not verification.ok else None,
    }, status=status)


def _csv(buckets, key):
    bucket = next((b for b in buckets if b.key == key), None)
    if bucket is None:
        return HttpResponse(f"Unknown review list {key!r}; use one of: " + ", ".join(b.key for b in buckets),
                            status=400, content_type="text/plain; charset=utf-8")
    table = bucket.table_class(bucket.rows)
    response = HttpResponse(spreadsheet.csv_text(table.as_values()), content_type="text/csv; charset=utf-8")
    response["Content-Disposition"] = f'attachment; filename="review_{key}.csv"'
    return response
