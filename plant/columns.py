"""Table columns the apps' tables share (register, review, work list, statistics)."""
import django_tables2 as tables


class IsoDateColumn(tables.DateColumn):
    """Dates as YYYY-MM-DD on the page, as in the CSV export: unambiguous on any locale."""

    def __init__(self, *args, **kwargs):
        kwargs.setdefault("format", "Y-m-d")
        # the date stays on one line; its heading may wrap ("Last calibrated"), or the column is cut at 820 px
        kwargs.setdefault("attrs", {"td": {"class": "nowrap"}})
        super().__init__(*args, **kwargs)
