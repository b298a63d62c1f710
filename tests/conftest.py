import pytest
from django.core.management import call_command


@pytest.fixture
def demo_plant(db):
    call_command("loaddata", "fixtures/demo_plant.json", verbosity=0)


@pytest.fixture
def demo_history(demo_plant):
    call_command("loaddata", "fixtures/demo_history.json", verbosity=0)
