"""Random histories on board and ashore, then merged, in either order of two kits, and merged
again: no vessel row is lost (each is ashore once or kept in a conflict), none is added twice,
no shore row goes, the merged history is possible (no unit in two places, no bench visit
while in the water), and the derived state equals a rebuild."""

import datetime as dt
import itertools

import pytest
from django.core.exceptions import ValidationError
from django.utils import timezone
from hypothesis import HealthCheck, event, example, given, settings
from hypothesis import strategies as st

from fleet.due.snapshot import rebuild_differences
from fleet.kits.merge import identified_models
from fleet.models import (
    Deployment,
    KitConflict,
    ReleaseTest,
    ServiceRecord,
    Transponder,
    UnitHold,
)
from fleet.services.deployments import deployment_recover, deployment_start
from fleet.services.fleet import unit_hold_set
from fleet.services.kit_merge import merge_apply_from
from fleet.services.records import amendment_create
from tests.builders import make_site, make_unit, make_user, make_variant, serviced_unit
from tests.documents.conftest import bench_visit, release_test
from tests.kits.merge_helpers import exported_kit, on_board

pytestmark = pytest.mark.django_db

_numbers = itertools.count(1)

# One step of a side's history: what, on which of the kit's two units, and a number.
OPS = st.tuples(
    st.sampled_from(["deploy", "visit", "open_deploy", "hold", "amend", "recover"]),
    st.integers(0, 1),
    st.integers(1, 900),
)
SIDE = st.lists(OPS, max_size=4)


def _run(op, unit, at, people, site):
    """One step through the services; a step the services refuse simply does not happen."""
    what, _, n = op
    tech, boss = people
    unit = Transponder.objects.get(pk=unit.pk)
    try:
        if what in ("deploy", "open_deploy"):
            deployment = deployment_start(
                deployment=Deployment(
                    unit=unit,
                    site=site,
                    over_side_at=at,
                    planned_days=10,
                    planned_interrogations_per_day=50,
                    transmit_power_step=1,
                ),
                by=tech,
                check_readiness=False,
            )
            if what == "deploy":
                deployment_recover(
                    deployment=deployment,
                    recovered_at=at + dt.timedelta(minutes=60 + n % 60),
                    replies_counted=n,
                    place=None,
                    by=tech,
                )
        elif what == "visit":
            bench_visit(
                unit,
                tech,
                release_test(tested_on=timezone.localdate(at), seconds_to_release=1 + n % 50),
                when=at,
                close_at=at + dt.timedelta(minutes=30),
                closer=boss,
            )
        elif what == "recover":
            wet = Deployment.objects.filter(unit=unit, recovered_at__isnull=True).first()
            if wet is not None:
                deployment_recover(
                    deployment=wet,
                    recovered_at=max(at, wet.over_side_at + dt.timedelta(minutes=5)),
                    replies_counted=n,
                    place=None,
                    by=tech,
                )
        elif what == "hold":
            hold = UnitHold.QUARANTINED if unit.hold == UnitHold.NONE else UnitHold.NONE
            unit_hold_set(unit=unit, hold=hold, reason=f"step {n}", by=boss, at=timezone.now())
        elif what == "amend":
            test = ReleaseTest.objects.filter(record__unit=unit, record__closed_at__isnull=False)
            test = test.order_by("pk").first()
            if test is not None:
                amendment_create(
                    record=test.record,
                    target=test,
                    field_name="seconds_to_release",
                    corrected_value=str(2 + n % 40),
                    reason=f"read again, step {n}",
                    by=boss,
                )
    except ValidationError:
        pass


def _history(side, units, start, people, site):
    now = timezone.now()
    for k, op in enumerate(side):
        at = now - dt.timedelta(hours=40) + dt.timedelta(hours=start + 3 * k)
        _run(op, units[op[1]], min(at, now - dt.timedelta(minutes=150)), people, site)


def _counts():
    return {model: model._base_manager.count() for model in identified_models()}


def _board_uids(alias, code):
    return {
        (model._meta.label_lower, str(uid))
        for model in identified_models()
        for uid in model._base_manager.using(alias)
        .filter(origin=code)
        .values_list("uid", flat=True)
    }


def _ashore_uids(code):
    return {
        (model._meta.label_lower, str(uid))
        for model in identified_models()
        for uid in model._base_manager.filter(origin=code).values_list("uid", flat=True)
    }


def _held_uids(code):
    """The vessel rows kept in the kit's conflicts, and those a change kept with them
    carries (a hold change's rows)."""
    rows = [
        row
        for vessel in KitConflict.objects.filter(merge__kit__code=code).values_list(
            "vessel_version", flat=True
        )
        for kept in vessel
        for row in [kept, *((kept.get("payload") or {}).get("rows") or [])]
    ]
    return {(row["model"], row["uid"]) for row in rows if "model" in row and not row.get("copy")}


def _impossible(unit):
    """The first impossible pair in the unit's shore history, or None."""
    deployments = list(Deployment.objects.filter(unit=unit).order_by("over_side_at"))
    for a, b in itertools.pairwise(deployments):
        if a.recovered_at is None or a.recovered_at > b.over_side_at:
            return (a, b)
    for visit in ServiceRecord.objects.filter(unit=unit):
        for d in deployments:
            if d.over_side_at < visit.opened_at and (
                d.recovered_at is None or visit.opened_at < d.recovered_at
            ):
                return (d, visit)
    return None


@settings(
    max_examples=15,
    deadline=None,
    suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow],
)
@given(
    boards=st.tuples(SIDE, SIDE),
    shore=SIDE,
    starts=st.tuples(st.integers(0, 12), st.integers(0, 12), st.integers(0, 12)),
    wet_at_export=st.tuples(st.booleans(), st.booleans()),
    reverse=st.booleans(),
)
# Found by this test: the vessel's deployment overlaps the shore's, so the unit's vessel work
# is kept in a conflict with its hold change; a later return file applied the hold change.
@example(
    boards=(
        [("recover", 0, 340), ("deploy", 0, 142), ("hold", 0, 278), ("deploy", 0, 47)],
        [("deploy", 0, 667)],
    ),
    shore=[("deploy", 0, 118), ("deploy", 0, 496), ("recover", 0, 1), ("deploy", 0, 1)],
    starts=(0, 0, 0),
    wet_at_export=(True, False),
    reverse=False,
)
def test_random_histories_on_both_sides_merge_without_losing_or_doubling_a_row(
    tmp_path, boards, shore, starts, wet_at_export, reverse
):
    n = next(_numbers)
    tech = make_user(f"tech{n}", "technician")
    boss = make_user(f"boss{n}", "supervisor")
    variant = make_variant(name=f"Property variant {n}")
    site = make_site(name=f"Property site {n}")
    day = timezone.localdate() - dt.timedelta(days=20)
    units = []
    for k in range(4):
        unit = make_unit(serial=f"PR{n}-{k}", acoustic_address=f"{k + 1}", variant=variant)
        serviced_unit(unit, by=tech, site=site, day=day)
        units.append(unit)
    for unit, wet in zip(units[::2], wet_at_export, strict=True):
        if wet:
            _run(
                ("open_deploy", 0, 1),
                unit,
                timezone.now() - dt.timedelta(hours=60),
                (tech, boss),
                site,
            )
    shore_before = {
        model: set(model._base_manager.values_list("pk", flat=True))
        for model in identified_models()
    }
    people = {"by": boss, "users": [tech, boss], "sites": [site], "directory": tmp_path}
    with (
        exported_kit(units[:2], **people) as (first_kit, first),
        exported_kit(units[2:], **people) as (second_kit, second),
    ):
        kits = [first_kit, second_kit]
        aliases = [first, second]
        for k, alias in enumerate(aliases):
            with on_board(alias):
                _history(boards[k], units[2 * k : 2 * k + 2], starts[k], (tech, boss), site)
        _history(shore, [units[0], units[2]], starts[2], (tech, boss), site)
        order = [1, 0] if reverse else [0, 1]
        for k in order:
            merge_apply_from(aliases[k], code=kits[k].code, file_sha256=f"{n:064d}", by=boss)
        after = _counts()
        for k in order:  # the same files again, then as later return files: nothing changes
            merge_apply_from(aliases[k], code=kits[k].code, file_sha256=f"{n:064d}", by=boss)
            merge_apply_from(aliases[k], code=kits[k].code, file_sha256=f"{n + 1:064d}", by=boss)
        assert _counts() == after
        for k, alias in enumerate(aliases):
            code = kits[k].code
            board, ashore, held = _board_uids(alias, code), _ashore_uids(code), _held_uids(code)
            assert board - ashore - held == set(), "a vessel row was neither merged nor kept"
            assert ashore <= board
            assert ashore.isdisjoint(held)
            event(f"vessel rows merged: {'some' if ashore else 'none'}")
            event(f"vessel rows kept in a conflict: {'some' if held else 'none'}")
    for model, pks in shore_before.items():
        assert pks <= set(model._base_manager.values_list("pk", flat=True))
    for unit in units:
        assert _impossible(unit) is None
    lines, _ = rebuild_differences(at=timezone.now())
    assert lines == []
