"""Settings for the flow-meter calibration tracker.

SQLite is the embedded default; set DATABASE_URL (e.g. postgres://postgres@127.0.0.1:5432/quenby)
for PostgreSQL, the production path.
"""
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
    "plant",
    "calibration",
    "reports",
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
]

ROOT_URLCONF = "plant.urls"

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

WSGI_APPLICATION = "plant.wsgi.application"

DATABASES = {
    "default": dj_database_url.config(
        default=f"sqlite:///{BASE_DIR / 'db.sqlite3'}", conn_max_age=60
    )
}

AUTH_PASSWORD_VALIDATORS = []
LANGUAGE_CODE = "en-gb"
TIME_ZONE = "UTC"
USE_I18N = True
USE_TZ = True

STATIC_URL = "static/"
STATIC_ROOT = BASE_DIR / "staticfiles"
STATICFILES_DIRS = [BASE_DIR / "static"]
# the product's own name on everything it sets in a browser or sends out
PRODUCT_NAME = "Quenby"
SESSION_COOKIE_NAME = "quenby_session"
CSRF_COOKIE_NAME = "quenby_csrftoken"
EMAIL_SUBJECT_PREFIX = "[Quenby] "

LOGIN_URL = "/accounts/login/"
LOGIN_REDIRECT_URL = "/meters/"
LOGOUT_REDIRECT_URL = "/accounts/login/"

DEFAULT_AUTO_FIELD = "django.db.models.BigAutoField"

DJANGO_TABLES2_TEMPLATE = "django_tables2/table.html"
DJANGO_TABLES2_TABLE_ATTRS = {"class": "grid"}  # every table, subclasses included, gets the one look

# Calibration policy; every value here is a setting, recorded where it is used.
CALIBRATION = {
    "decision_rule": os.environ.get("CAL_DECISION_RULE", "simple"),  # ILAC-G8: "simple" or "guarded" (w = U)
    "interval_method": "reliability",  # "reliability" (NCSL RP-1 exponential) or "staircase" (OIML D 10)
    "reliability_target": 0.95,
    "staircase_extend": 1.25,
    "staircase_shorten": 0.5,
    "min_interval_days": 30,
    "max_interval_days": 1095,
    "drift_margin_days": 30,
}
