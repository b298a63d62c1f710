"""Settings for the flow-meter calibration tracker.

SQLite is the embedded default; set DATABASE_URL (e.g. postgres://postgres@127.0.0.1:5432/quenby)
for PostgreSQL, the production path.
"""
import datetime as dt
import os
from pathlib import Path

import dj_database_url

BASE_DIR = Path(__file__).resolve().parent.parent

SECRET_KEY = os.environ.get("DJANGO_SECRET_KEY", "dev-only-not-secret")
DEBUG = os.environ.get("DJANGO_DEBUG", "1") == "1"
ALLOWED_HOSTS = [h for h in os.environ.get("DJANGO_ALLOWED_HOSTS", "localhost,127.0.0.1,testserver").split(",") if h]

INSTALLED_APPS = [
    "django.contrib.admin",
    "django.contrib.auth",
    "django.contrib.contenttypes",
    "django.contrib.sessions",
    "django.contrib.messages",
    "django.contrib.staticfiles",
    "django_tables2",
    "django_filters",
    "simple_history",
    "axes",
    "ledger",  # before the apps whose records it seals; its loaddata seals the signed records a fixture brings
    "plant",
    "calibration",
    "reports",
    "maintenance",
    "scheduling",  # the due-date engine: listens to the apps below it, none of them calls it
    "offline",
]

MIDDLEWARE = [
    "django.middleware.security.SecurityMiddleware",
    "whitenoise.middleware.WhiteNoiseMiddleware",
    "django.contrib.sessions.middleware.SessionMiddleware",
    "django.middleware.common.CommonMiddleware",
    "django.middleware.csrf.CsrfViewMiddleware",
    "django.contrib.auth.middleware.AuthenticationMiddleware",
    "django.contrib.auth.middleware.LoginRequiredMiddleware",
    "simple_history.middleware.HistoryRequestMiddleware",
    "django.contrib.messages.middleware.MessageMiddleware",
    "django.middleware.clickjacking.XFrameOptionsMiddleware",
    # last, as django-axes asks: turns a locked-out login into the lockout page
    "axes.middleware.AxesMiddleware",
]

ROOT_URLCONF = "quenby.urls"

TEMPLATES = [
    {
        "BACKEND": "django.template.backends.django.DjangoTemplates",
        "DIRS": [BASE_DIR / "templates"],
        "APP_DIRS": True,
        "OPTIONS": {
            "context_processors": [
                "django.template.context_processors.request",
                "django.contrib.auth.context_processors.auth",
                "django.contrib.messages.context_processors.messages",
            ],
        },
    },
]

WSGI_APPLICATION = "quenby.wsgi.application"

# Connections are kept for a minute between requests; each is checked before a request first uses it, so the
# first request after the database server restarted reconnects instead of failing on the dead connection.
DATABASES = {
    "default": dj_database_url.config(
        default=f"sqlite:///{BASE_DIR / 'db.sqlite3'}", conn_max_age=60, conn_health_checks=True
    )
}
# The review indexes carry the id as a non-key column on PostgreSQL; SQLite, whose indexes hold the row id
# anyway, leaves that part out, which is what is wanted there.
SILENCED_SYSTEM_CHECKS = ["models.W040"]

# Django's own validators: not too like the account's names, long enough, not a common password, not all digits
AUTH_PASSWORD_VALIDATORS = [
    {"NAME": "django.contrib.auth.password_validation.UserAttributeSimilarityValidator"},
    {"NAME": "django.contrib.auth.password_validation.MinimumLengthValidator", "OPTIONS": {"min_length": 10}},
    {"NAME": "django.contrib.auth.password_validation.CommonPasswordValidator"},
    {"NAME": "django.contrib.auth.password_validation.NumericPasswordValidator"},
]

# Failed logins are throttled (django-axes): after AXES_FAILURE_LIMIT failures for one account, or from one
# address, logging in there is refused until the cool-off has passed or an administrator unlocks it
# (/accounts/lockouts/ or `manage.py axes_reset_username NAME` / `axes_reset_ip ADDRESS`).
AUTHENTICATION_BACKENDS = [
    "axes.backends.AxesStandaloneBackend",  # first: refuses a locked-out login before the password is checked
    "django.contrib.auth.backends.ModelBackend",
]
AXES_FAILURE_LIMIT = int(os.environ.get("QUENBY_LOGIN_FAILURE_LIMIT", "5"))
AXES_COOLOFF_TIME = dt.timedelta(minutes=int(os.environ.get("QUENBY_LOGIN_COOLOFF_MINUTES", "30")))
AXES_LOCKOUT_PARAMETERS = ["username", "ip_address"]  # each on its own: per account and per address
AXES_RESET_ON_SUCCESS = True  # a successful login clears that account's failures
AXES_LOCKOUT_CALLABLE = "plant.accounts.lockout_response"
AXES_CLIENT_IP_CALLABLE = "plant.accounts.client_ip"
# number of reverse proxies in front of the application that append to X-Forwarded-For (0: use REMOTE_ADDR)
TRUSTED_PROXY_COUNT = int(os.environ.get("DJANGO_TRUSTED_PROXY_COUNT", "0"))
LANGUAGE_CODE = "en-gb"
# the plant's own time zone (IANA name): "today" and date defaults are taken there; a site may name its own
TIME_ZONE = os.environ.get("QUENBY_TIME_ZONE", "UTC")
USE_I18N = True
USE_TZ = True

STATIC_URL = "static/"
STATIC_ROOT = BASE_DIR / "staticfiles"
STATICFILES_DIRS = [BASE_DIR / "static"]
# Uploaded maintenance photos: on disk under MEDIA_ROOT, served only through a logged-in view (no MEDIA_URL).
MEDIA_ROOT = Path(os.environ.get("QUENBY_MEDIA_ROOT", BASE_DIR / "media"))
MAINTENANCE_PHOTO_MAX_BYTES = 8 * 1024 * 1024
# The register import (plant/importer.py; docs/operations.md): each limit is refused in a sentence naming it.
IMPORT_MAX_UPLOAD_MB = float(os.environ.get("QUENBY_IMPORT_MAX_UPLOAD_MB", "20"))  # the file as uploaded
IMPORT_MAX_ROWS = int(os.environ.get("QUENBY_IMPORT_MAX_ROWS", "50000"))  # data rows of one file
# an .xlsx is a zip: what it unpacks to, in all, and how many times its packed size one part may unpack to
IMPORT_MAX_XLSX_UNPACKED_MB = float(os.environ.get("QUENBY_IMPORT_MAX_XLSX_UNPACKED_MB", "100"))
IMPORT_MAX_XLSX_RATIO = float(os.environ.get("QUENBY_IMPORT_MAX_XLSX_RATIO", "100"))
# a checked file is kept on the server for its apply (plant/kept_uploads.py), in the default storage under this
# folder, this long
IMPORT_KEPT_DIR = os.environ.get("QUENBY_IMPORT_KEPT_DIR", "kept-imports")
IMPORT_KEEP_MINUTES = int(os.environ.get("QUENBY_IMPORT_KEEP_MINUTES", "120"))
# the product's own name on everything it sets in a browser or sends out
PRODUCT_NAME = "Quenby"
SESSION_COOKIE_NAME = "quenby_session"
CSRF_COOKIE_NAME = "quenby_csrftoken"
EMAIL_SUBJECT_PREFIX = "[Quenby] "

LOGIN_URL = "/accounts/login/"
LOGIN_REDIRECT_URL = "/positions/"
LOGOUT_REDIRECT_URL = "/accounts/login/"

DEFAULT_AUTO_FIELD = "django.db.models.BigAutoField"

DJANGO_TABLES2_TEMPLATE = "django_tables2/table.html"
DJANGO_TABLES2_TABLE_ATTRS = {"class": "grid"}  # every table, subclasses included, gets the one look

# Digital calibration certificates (DCC 3.2.0, calibration/dcc.py): the laboratory's country (ISO 3166-1), and the
# PEM files of the key and X.509 certificate that sign each DCC (enveloped XML signature); without both, unsigned.
DCC_COUNTRY = os.environ.get("QUENBY_DCC_COUNTRY", "GB")
DCC_KEY = os.environ.get("QUENBY_DCC_KEY", "")
DCC_CERT = os.environ.get("QUENBY_DCC_CERT", "")
# the schema files the uploaded DCCs are checked against (calibration/dcc_schema.py); default ../shared/dcc-schema
DCC_SCHEMA_DIR = os.environ.get("QUENBY_DCC_SCHEMA_DIR", "")

# Calibration policy; every value here is a setting, recorded where it is used.
CALIBRATION = {
    "decision_rule": os.environ.get("CAL_DECISION_RULE", "simple"),  # ILAC-G8: "simple" or "guarded" (w = U)
    "interval_method": "reliability",  # "reliability" (NCSL RP-1 exponential) or "staircase" (OIML D 10)
    "reliability_target": 0.95,
    "reliability_min_observations": 8,  # observed intervals before the reliability model may move one (our policy)
    "staircase_extend": 1.25,
    "staircase_shorten": 0.5,
    "min_interval_days": 30,
    "max_interval_days": 1095,
    "drift_margin_days": 30,
    # a point's TUR (MPE / its own 95 % U, ANSI/NCSL Z540.3) below 4:1: "warn" (results page and certificate only)
    # or "require_guarded" (the tablet form also refuses simple acceptance then; ILAC-G8 guarded, w = U)
    "low_tur_policy": os.environ.get("CAL_LOW_TUR_POLICY", "require_guarded"),
}

# Conformity risk (JCGM 106, calibration/conformity.py): the largest global probability of false accept a decision
# rule may leave; 2 % is ANSI/NCSL Z540.3's bound (its first method, §5.3 b). A fraction, 0 < target < 1.
QUENBY_PFA_TARGET = float(os.environ.get("QUENBY_PFA_TARGET", "0.02"))
