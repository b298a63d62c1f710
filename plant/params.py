"""Numbers read from a URL or a query string: an odd value is passed over (no such page, no filter), never a crash.

`str.isdigit()` accepts "²" and `int()` accepts "٣" and "1_000"; a 20-digit id is beyond what SQLite can bind.
An id here is ASCII digits only, at least 1 and at most the largest value of the id columns (BigAutoField, 64-bit
signed), so every database answers "no such row" the same way.
"""
from __future__ import annotations

import re

from django.core.paginator import EmptyPage

MAX_ID = 2**63 - 1
_DIGITS = re.compile(r"[0-9]{1,19}")


def parse_id(text) -> int | None:
    """The id written in `text`, or None when it is not one (see the module docstring)."""
    if not isinstance(text, str) or not _DIGITS.fullmatch(text):
        return None
    value = int(text)
    return value if 1 <= value <= MAX_ID else None


def query_id(request, name) -> int | None:
    """The id in the query parameter `name`, or None when absent or odd (the filter is then not applied)."""
    return parse_id(request.GET.get(name, "").strip())


class IdConverter:
    """`<id:pk>` in a URL: matches an id as `parse_id` reads it; anything else is no match (404)."""

    regex = "[0-9]{1,19}"

    def to_python(self, value):
        number = parse_id(value)
        if number is None:
            raise ValueError(value)  # Django then tries the next pattern, and ends in 404
        return number

    def to_url(self, value):
        return str(int(value))


def configure_table(request, table, per_page, **paginate):
    """django-tables2's RequestConfig with the page size ours: a ?per_page= from the request is ignored (a
    negative one crashed the page, a huge one would read the whole fleet); an odd page number shows the first
    page, one past the end the last."""
    table.request = request
    order_by = request.GET.getlist(table.prefixed_order_by_field)
    if order_by:
        table.order_by = order_by
    page = parse_id(request.GET.get(table.prefixed_page_field, "").strip()) or 1
    try:
        table.paginate(page=page, per_page=per_page, **paginate)
    except EmptyPage:
        table.page = table.paginator.page(table.paginator.num_pages)
    return table
