"""Django's JSON serialisation with times to the microsecond (the backups' format, "exact-json").

Django's own JSON encoder cuts times to milliseconds; a backup must give back exactly what was stored, or a
restored signed record (its signing time) would no longer match its hash in the record chain."""
import datetime as dt

from django.core.serializers import json as django_json
from django.core.serializers.json import DjangoJSONEncoder

Deserializer = django_json.Deserializer


class ExactEncoder(DjangoJSONEncoder):
    def default(self, o):
        if isinstance(o, dt.datetime):
            text = o.isoformat()
            return text[:-6] + "Z" if text.endswith("+00:00") else text
        if isinstance(o, dt.time):
            return o.isoformat()
        return super().default(o)


class Serializer(django_json.Serializer):
    def _init_options(self):
        self.options.setdefault("cls", ExactEncoder)
        super()._init_options()
