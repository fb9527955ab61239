"""The invented demo fleet that ``manage.py seed_demo`` loads.

Every name here is made up: the operator's workshop and store, the two vessels, the five
sites, the three variants, the thirty units and the people's user names.

- ``scenario.py``: the invented data (logins, places, sites, variants, the unit roster).
- ``simulation.py``: plans each unit's history from the roster (pure, seeded, anchored on
  ``today``) and writes one unit's plan through the services.
- ``loading.py``: the logins and groups, the reference rows, loading the whole fleet in one
  transaction, and deleting it for ``--reset``.

The names below are what the management command and the tests use.
"""

from fleet.demo.loading import (
    DemoLogins,
    LoadSummary,
    delete_demo,
    demo_loaded,
    ensure_logins,
    fleet_fingerprint,
    load_demo,
)
from fleet.demo.scenario import (
    DEMO_PASSWORD,
    DEMO_USERNAMES,
    DEMO_VARIANT_NAMES,
    EXTRA_TECHNICIANS,
    LOGINS,
    ROSTER,
)
from fleet.demo.simulation import UnitPlan, plan_fleet, plan_unit

__all__ = [
    "DEMO_PASSWORD",
    "DEMO_USERNAMES",
    "DEMO_VARIANT_NAMES",
    "EXTRA_TECHNICIANS",
    "LOGINS",
    "ROSTER",
    "DemoLogins",
    "LoadSummary",
    "UnitPlan",
    "delete_demo",
    "demo_loaded",
    "ensure_logins",
    "fleet_fingerprint",
    "load_demo",
    "plan_fleet",
    "plan_unit",
]
