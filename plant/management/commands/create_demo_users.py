"""Create one demo account per role with a fresh random password, and print the passwords once."""
import secrets

from django.contrib.auth.models import Group, User
from django.core.management import BaseCommand

from plant.roles import ADMINISTRATOR, REVIEWER, TECHNICIAN, ensure_roles

DEMO_USERS = [
    ("tech", "Rowan", "Fieldhouse", TECHNICIAN),
    ("tech2", "Imke", "Saltmarsh", TECHNICIAN),
    ("reviewer", "Dara", "Quillon", REVIEWER),
    ("admin", "Ossian", "Pike", ADMINISTRATOR),
]


class Command(BaseCommand):
    help = "Create (or reset) the demo accounts and print their passwords; for the demo only."

    def handle(self, *args, **options):
        ensure_roles()
        self.stdout.write("Demo accounts (passwords are new each time this runs):")
        for username, first, last, role in DEMO_USERS:
            user, _ = User.objects.get_or_create(username=username)
            user.first_name, user.last_name = first, last
            user.is_staff = user.is_superuser = role == ADMINISTRATOR
            password = secrets.token_urlsafe(9)
            user.set_password(password)
            user.save()
            user.groups.set([Group.objects.get(name=role)])
            self.stdout.write(f"  {role:<14} {username:<10} {password}")
