"""The demo: an invented observatory with two telescopes and three years of nightly usage.

Everything here is invented: the observatory, its coordinates, its people and its numbers. The
generator is seeded, so the same ``today`` gives the same data. Seasons: a dusty, windy spring
(March to June) and a wet summer monsoon (July to September).
"""
from __future__ import annotations

import datetime as dt

import numpy as np
from django.conf import settings
from django.contrib.auth.models import Group, User
from django.db import connection, transaction
from django.db.models import Q
from django.utils import timezone
from simple_history.utils import bulk_create_with_history

from observatory_ops.calc import nights
from observatory_ops.logbook.models import NightUsage, Reading, ServiceRecord
from observatory_ops.mirrors.models import CleaningEvent, CoatingEvent, Mirror, ReflectanceMeasurement
from observatory_ops.mirrors.services import plans_a_cleaning_restarts
from observatory_ops.planning import metrics
from observatory_ops.planning import services as planning
from observatory_ops.planning.models import BookedRun
from observatory_ops.registry.models import CrewDayOff, Site, Telescope
from observatory_ops.registry.services import subsystem_create
from observatory_ops.workorders.models import EnergyControlInspection, IsolationPoint, Part

SEED = 20261202
SITE_SLUG = "vestal-ridge"
HISTORY_DAYS = 3 * 365

#: Demo logins: (username, role, full name, password). Invented people; passwords for the demo only.
DEMO_USERS = (
    ("viewer", "viewer", "Juno Ambry", "demo-viewer-2026"),
    ("technician", "technician", "Pavo Linnet", "demo-technician-2026"),
    ("engineer", "engineer", "Mirela Ostrand", "demo-engineer-2026"),
    ("admin", "administrator", "Rasmus Tolve", "demo-admin-2026"),
)

# Month (1..12) -> (chance the dome opens, mean PM10 ug/m3 while open, mean RH %).
_CLIMATE = {
    1: (0.62, 14, 38), 2: (0.60, 18, 35), 3: (0.68, 45, 28), 4: (0.74, 70, 22), 5: (0.78, 85, 18),
    6: (0.72, 60, 24), 7: (0.30, 16, 68), 8: (0.28, 12, 72), 9: (0.42, 14, 60), 10: (0.70, 20, 40),
    11: (0.66, 16, 42), 12: (0.60, 12, 45),
}

# The register: (kind, name, parent name or None).
_TREE = (
    ("truss", "Optical tube and top end", None),
    ("mirror_cell", "Primary mirror cell", "Optical tube and top end"),
    ("primary_mirror", "Primary mirror", "Primary mirror cell"),
    ("secondary_mirror", "Secondary mirror", "Optical tube and top end"),
    ("focus_mechanism", "Focuser", "Optical tube and top end"),
    ("mirror_cover", "Mirror cover", "Optical tube and top end"),
    ("cooling_fans", "Mirror cell fans", "Primary mirror cell"),
    ("axis1_drive", "Axis 1 drive", None),
    ("drive_rollers", "Axis 1 drive rollers", "Axis 1 drive"),
    ("encoder", "Axis 1 encoder", "Axis 1 drive"),
    ("brake", "Axis 1 brake", "Axis 1 drive"),
    ("axis2_drive", "Axis 2 drive", None),
    ("encoder", "Axis 2 encoder", "Axis 2 drive"),
    ("brake", "Axis 2 brake", "Axis 2 drive"),
    ("cable_routing", "Cable wraps", None),
    ("limits", "Limits and interlocks", None),
    ("ac_power", "AC distribution", None),
    ("dc_supplies", "DC supplies", None),
    ("servo_drives", "Servo drives", None),
    ("computers", "Mount control computer", None),
)

#: The T70 was commissioned years before the nightly log was kept (invented); these of its subsystems are the
#: originals and carry that day as "in service since". Only logged nights have hours, so their reliability figures
#: still count from the log's first night, as those of the subsystems without the date do.
_T70_ORIGINALS = ("Axis 1 drive", "Axis 2 drive", "Axis 1 encoder", "Mirror cell fans")
_T70_COMMISSIONED_BEFORE_LOG = dt.timedelta(days=5 * 365)


#: Where the refusals below send the demo: a database of its own.
_OWN_DATABASE = (
    "Give the demo a database of its own: run it with OBSOPS_DATA_DIR set to an empty folder, e.g. "
    "`OBSOPS_DATA_DIR=/tmp/obsops-demo python manage.py demo` (or with DATABASE_URL set to another database)."
)


def load_refusal() -> str:
    """Why the demo must not be loaded here, or "" when it may be (the demo command and the empty home page ask).

    The demo's logins have passwords published in the README, so it goes only into a trial installation (the
    development SECRET_KEY) whose database holds nothing but the demo: no site but its own and, until its site is
    loaded, no user but its own logins (known by username and invented full name). A database not migrated yet
    holds nothing.
    """
    if settings.SECRET_KEY != settings.DEVELOPMENT_SECRET_KEY:
        return ("SECRET_KEY is set, so this is a production installation: the demo creates logins whose passwords "
                "are published in the README. Load it into a trial installation of its own.")
    tables = set(connection.introspection.table_names())
    if not {Site._meta.db_table, User._meta.db_table} <= tables:
        return ""
    others = list(Site.objects.exclude(slug=SITE_SLUG).values_list("name", flat=True)[:3])
    if others:
        return f"this database already holds other sites ({', '.join(others)}). {_OWN_DATABASE}"
    if Site.objects.filter(slug=SITE_SLUG).exists():
        return ""
    ours = Q()
    for username, _role, full_name, _password in DEMO_USERS:
        first, last = full_name.split(" ", 1)
        ours |= Q(username=username, first_name=first, last_name=last)
    strangers = list(User.objects.exclude(ours).order_by("username").values_list("username", flat=True)[:3])
    if strangers:
        return (f"this database already has users of its own ({', '.join(strangers)}), and the demo would add "
                f"logins whose passwords are published in the README. {_OWN_DATABASE}")
    return ""


def demo_users() -> list[tuple[str, str, str | None]]:
    """Create one login per role where the username is free; returns (username, role, password) for printing.

    An account that already exists is left as it is (no group, no password change), and its password is
    given as None unless it is still the demo's own (an account this command made on an earlier run).
    """
    out = []
    for username, role, full_name, password in DEMO_USERS:
        first, last = full_name.split(" ", 1)
        user, created = User.objects.get_or_create(username=username, defaults={"first_name": first, "last_name": last})
        if created:
            user.set_password(password)
            user.is_staff = role in ("engineer", "administrator")  # the admin edits the register
            user.is_superuser = role == "administrator"
            user.save()
            user.groups.add(Group.objects.get_or_create(name=role)[0])
        out.append((username, role, password if created or user.check_password(password) else None))
    return out


def build(today: dt.date | None = None) -> tuple[Site, bool]:
    """Load the demo unless it is already there. Returns (site, created)."""
    existing = Site.objects.filter(slug=SITE_SLUG).first()
    if existing:
        return existing, False
    rng = np.random.default_rng(SEED)
    with transaction.atomic():
        users = {u[1]: User.objects.get(username=u[0]) for u in DEMO_USERS}
        site = Site.objects.create(
            name="Vestal Ridge Observatory",
            slug=SITE_SLUG,
            latitude_deg=39.6072,
            longitude_deg=-110.3741,
            elevation_m=2410,
            time_zone="America/Denver",
            dust_climate="Dusty, windy spring (March to June) from the bare valley floor below the ridge; wet "
            "summer monsoon (July to September).",
        )
        today = today or planning.site_today(site)
        start = today - dt.timedelta(days=HISTORY_DAYS)
        t70 = Telescope.objects.create(
            site=site, name="T70", aperture_m=0.7, mount=Telescope.Mount.FORK, tube_mass_kg=260,
            notes="0.7 m Ritchey-Chretien on an equatorial fork; the site's main survey telescope.",
        )
        r40 = Telescope.objects.create(
            site=site, name="R40", aperture_m=0.4, mount=Telescope.Mount.GERMAN, tube_mass_kg=70,
            notes="0.4 m robotic telescope on a German equatorial mount, runs unattended.",
        )
        subsystems = {}
        for telescope in (t70, r40):
            for kind, name, parent in _TREE:
                original = telescope is t70 and name in _T70_ORIGINALS
                subsystems[(telescope.name, name)] = subsystem_create(
                    telescope, kind, name, counting_from=start,
                    parent=subsystems.get((telescope.name, parent)) if parent else None,
                    in_service_since=start - _T70_COMMISSIONED_BEFORE_LOG if original else None,
                )
        _crew_days_off(site, today)
        _usage(site, start, today, rng, r40)
        _drive_settle_readings(subsystems, users["technician"], today, rng)
        _service_history(site, subsystems, users, today, rng)
        _workshop(site, (t70, r40))
        _inspections(t70, users, today)
        _mirrors(site, subsystems, users["technician"], today, rng)
        _repairs(site, subsystems, users, start)
        planning.site_recompute(site, today)
        _work_orders(site, users, today)
    return site, True


def _crew_days_off(site: Site, today: dt.date) -> None:
    """The crew's days off over the coming two years besides weekends: the end-of-year closure (invented)."""
    for year in (today.year, today.year + 1):
        for month, day, note in ((12, 24, "end-of-year closure"), (12, 25, "end-of-year closure"),
                                 (12, 31, "end-of-year closure"), (1, 1, "end-of-year closure")):
            day_off = dt.date(year if month == 12 else year + 1, month, day)
            if day_off >= today:
                CrewDayOff.objects.create(site=site, date=day_off, note=note)


#: The R40's control software has sent its own nights for this many nights up to today (the rest of the log, and the
#: T70's, are the site's rows): the demo of usage logged per telescope.
R40_OWN_NIGHTS = 120


def _usage(site: Site, start: dt.date, today: dt.date, rng: np.random.Generator, r40: Telescope) -> None:
    place = nights.Site(site.latitude_deg, site.longitude_deg, site.elevation_m, site.time_zone)
    sky = nights.nights_for_range(place, start, (today - start).days)
    rows = []
    for i in range(len(sky.dark_hours)):
        night = start + dt.timedelta(days=i)
        p_open, pm10_mean, rh_mean = _CLIMATE[night.month]
        # Bright time costs the robotic programme less, so a few nights near full moon stay closed.
        opens = rng.random() < p_open * (0.85 if sky.moon_illumination[i] > 0.9 else 1.0)
        dark = float(sky.dark_hours[i])
        open_hours = round(min(dark + 1.0, dark * rng.uniform(0.55, 1.05)), 2) if opens else 0.0
        slews = int(rng.poisson(5.5 * open_hours)) if open_hours else 0
        rows.append(
            NightUsage(
                site=site, night=night, open_hours=open_hours, slews=slews,
                axis1_travel_deg=round(slews * rng.uniform(18, 32), 1),
                axis2_travel_deg=round(slews * rng.uniform(10, 20), 1),
                brake_cycles=slews + (2 if open_hours else 0),
                pm10_ugm3=round(float(rng.lognormal(np.log(pm10_mean), 0.45)), 1) if open_hours else None,
                humidity_pct=round(float(np.clip(rng.normal(rh_mean, 10), 5, 100)), 0),
                dew=bool(rng.random() < (0.25 if rh_mean > 55 else 0.05)),
                rain=bool(rng.random() < (0.35 if night.month in (7, 8, 9) else 0.03)),
                source=NightUsage.Source.DEMO,
            )
        )
    # The robotic R40 works through many short exposures: more slews an open hour than the site's figures, and a
    # little less open time (it closes for its own weather limits).
    own = []
    for row in rows[-R40_OWN_NIGHTS:]:
        open_hours = round(row.open_hours * rng.uniform(0.85, 1.0), 2)
        slews = int(rng.poisson(9.0 * open_hours)) if open_hours else 0
        own.append(NightUsage(
            site=site, telescope=r40, night=row.night, open_hours=open_hours, slews=slews,
            axis1_travel_deg=round(slews * rng.uniform(12, 22), 1),
            axis2_travel_deg=round(slews * rng.uniform(6, 14), 1),
            brake_cycles=slews + (2 if open_hours else 0), pm10_ugm3=row.pm10_ugm3, humidity_pct=row.humidity_pct,
            dew=row.dew, rain=row.rain, source=NightUsage.Source.DEMO,
        ))
    bulk_create_with_history(rows + own, NightUsage, batch_size=500)


def _drive_settle_readings(subsystems, technician, today: dt.date, rng: np.random.Generator) -> None:
    """Monthly settle-time step tests on the axis 1 drives, drifting upward toward the 1 s limit."""
    for telescope, drift in (("T70", 0.0022), ("R40", 0.0009)):
        drive = subsystems[(telescope, "Axis 1 drive")]
        for months_ago in range(8, -1, -1):
            day = today - dt.timedelta(days=30 * months_ago + 3)
            value = 0.55 + drift * (240 - 30 * months_ago) + rng.normal(0, 0.02)
            Reading.objects.create(
                subsystem=drive, quantity="settle_time_s", unit="s", value=round(value, 3),
                taken_at=timezone.make_aware(dt.datetime.combine(day, dt.time(22, 30)), drive.telescope.site.zone),
                taken_by=technician, note="step test, 2 degree slew",
            )


def _service_history(site, subsystems, users, today: dt.date, rng: np.random.Generator) -> None:
    """Past services so that today shows a mix of overdue, due and later items."""
    records = []
    for subsystem in subsystems.values():
        # Recoats follow the coating dates, and the primaries' cleaning plans their cleanings (``_mirrors``).
        primary = (subsystem.telescope.name, subsystem.name) in _PRIMARIES
        cleaning = [p.pk for p in plans_a_cleaning_restarts(subsystem)] if primary else []
        for plan in subsystem.plans.exclude(name__startswith="Recoat").exclude(pk__in=cleaning):
            calendar = next((t.limit for t in plan.triggers.all() if t.metric == "calendar_days"), 365.0)
            # A fraction of the interval has passed since the last service: above 1 is overdue.
            passed = float(rng.choice([0.35, 0.55, 0.7, 0.85, 0.93, 0.97, 1.08]))
            last = today - dt.timedelta(days=int(calendar * passed))
            previous = last - dt.timedelta(days=int(calendar * rng.uniform(0.8, 1.0)))
            for day in (previous, last):
                if day < plan.counting_from:
                    continue
                records.append(
                    ServiceRecord(
                        subsystem=subsystem, plan=plan, performed_on=day, performed_by=users["technician"],
                        hours_spent=round(plan.estimated_hours * rng.uniform(0.8, 1.4), 1),
                        summary=plan.name, findings="", created_by=users["technician"],
                    )
                )
    bulk_create_with_history(records, ServiceRecord)


def _inspections(t70, users: dict, today: dt.date) -> None:
    """T70's energy control procedure inspected ten months ago by the administrator, watching the technician; R40's
    never, so the dashboard shows both (a yearly inspection is due, OSHA 29 CFR 1910.147(c)(6))."""
    EnergyControlInspection.objects.create(
        telescope=t70, inspected_on=today - dt.timedelta(days=300), inspector=users["administrator"],
        employees="Pavo Linnet",
        findings="Lockout of the mount isolator, servo enable key and brake air watched on a drive order and checked "
                 "against the procedure: followed as written; the brake air valve's tag was faded and was replaced.",
        recorded_by=users["administrator"],
    )


def _workshop(site: Site, telescopes) -> None:
    """Energy isolation points of each telescope and the site's spare-parts shelf (one part below reorder)."""
    for telescope in telescopes:
        bulk_create_with_history(
            [
                IsolationPoint(
                    telescope=telescope, energy=IsolationPoint.Energy.AC, label=f"{telescope.name} mount isolator",
                    location="pier cabinet, left door",
                    verify=("voltage tester, proved before and after, reads no voltage at the pier cabinet's "
                            "outgoing terminals; the mount controller stays dark when switched on"),
                ),
                IsolationPoint(
                    telescope=telescope, energy=IsolationPoint.Energy.SERVO,
                    label=f"{telescope.name} servo amplifier enable key", location="pier cabinet",
                    verify="drive status lamps off; axis does not answer a jog command",
                ),
                IsolationPoint(
                    telescope=telescope, energy=IsolationPoint.Energy.DC, label="24 V instrument supply breaker",
                    location="rack 2, breaker 4", verify="meter reads 0 V at the focuser terminal block",
                ),
            ],
            IsolationPoint,
        )
    IsolationPoint.objects.create(
        telescope=telescopes[0], energy=IsolationPoint.Energy.AIR, label="brake air supply valve",
        location="compressor room, blue valve", verify="gauge at the brake manifold reads zero after bleeding",
    )
    bulk_create_with_history(
        [
            Part(site=site, name="Fan intake filter 120 mm", part_number="VR-FLT-120", quantity_on_hand=3,
                 reorder_point=4, location="store, shelf B2"),
            Part(site=site, name="Brake pad set", part_number="VR-BRK-07", quantity_on_hand=2, reorder_point=1,
                 location="store, shelf C1", unit="set"),
            Part(site=site, name="CO2 cylinder for snow cleaning", part_number="VR-CO2-10", quantity_on_hand=1,
                 reorder_point=1, location="gas cage", unit="cylinder"),
            Part(site=site, name="Encoder cleaning swabs", part_number="VR-SWB-50", quantity_on_hand=40,
                 reorder_point=10, location="store, shelf A4", unit="swab"),
            Part(site=site, name="Drive roller wipes (solvent)", part_number="VR-WIP-20", quantity_on_hand=12,
                 reorder_point=5, location="flammables cabinet", unit="pack"),
        ],
        Part,
    )


# Mirror: (telescope, diameter, thickness, hole mm, material, cell kg, coated months ago, metal, layers,
#          decline per dust-weighted hour, recovery per cleaning). The cells' masses are invented, of the order of a
#          steel cell with its supports and fans for such a mirror, so the demo's lifts count a cell.
_MIRRORS = (
    ("T70", 700, 70, 160, "borosilicate", 95, 14, "al", [], 3.4e-5, 0.5),
    ("R40", 400, 45, 100, "glass_ceramic", 25, 22, "al", [{"material": "SiO2", "thickness_nm": 100}], 1.6e-5, 0.4),
)


_PRIMARIES = {(telescope, "Primary mirror") for telescope, *_ in _MIRRORS}


def _mirrors(site, subsystems, technician, today: dt.date, rng: np.random.Generator) -> None:
    """Primary mirrors with a coating, CO2-snow cleanings every quarter and monthly band measurements.

    The measurements follow the decline model of ``calc.reflectance`` driven by the dusty nights of the mirror's
    telescope (its log: planning.services.UsageLog), plus measurement noise, so the fit on the mirror page recovers
    an invented decline rate.
    """
    from observatory_ops.calc import coating

    def exposure_on(telescope: str, since: dt.date, day: dt.date) -> float:
        log = planning.UsageLog.for_telescope(site.telescopes.get(name=telescope))
        cumulative = np.concatenate([[0.0], np.cumsum(log.per_night(metrics.DUST_HOURS, 1.0))])
        first, last = np.searchsorted(log.nights, np.datetime64(since)), np.searchsorted(log.nights, np.datetime64(day))
        return float(cumulative[last] - cumulative[first])

    for telescope, dia, thick, hole, material, cell, months, metal, layers, rate, recovery in _MIRRORS:
        mirror = Mirror.objects.create(
            subsystem=subsystems[(telescope, "Primary mirror")], diameter_mm=dia, thickness_mm=thick, hole_mm=hole,
            material=material, cell_mass_kg=cell,
        )
        coated = today - dt.timedelta(days=int(months * 30.4))
        CoatingEvent.objects.create(mirror=mirror, coated_on=coated, metal=metal, layers=layers,
                                    note="vendor chamber, witness sample kept")
        recoat = mirror.subsystem.plans.get(name__startswith="Recoat")
        ServiceRecord.objects.create(
            subsystem=mirror.subsystem, plan=recoat, performed_on=coated, performed_by=technician, hours_spent=36,
            summary="Primary removed, stripped and recoated; reinstalled and collimated", created_by=technician,
        )
        fresh = coating.coating_curve(metal, [coating.Layer(x["material"], x["thickness_nm"]) for x in layers])
        r0 = fresh["band_mean"] - 0.004  # a real chamber lands a little under the ideal film
        cleanings = [coated + dt.timedelta(days=d) for d in range(95, (today - coated).days, 91)]
        for day in cleanings:  # each cleaning is the cleaning plan's work, as mirrors.services.cleaning_log records it
            CleaningEvent.objects.create(mirror=mirror, cleaned_on=day, method=CleaningEvent.Method.CO2_SNOW)
            for plan in plans_a_cleaning_restarts(mirror.subsystem):
                ServiceRecord.objects.create(
                    subsystem=mirror.subsystem, plan=plan, performed_on=day, performed_by=technician,
                    hours_spent=plan.estimated_hours, summary="Cleaning: CO2 snow", created_by=technician,
                )
        clean_exposures = [exposure_on(telescope, coated, c) for c in cleanings]
        for day in [coated + dt.timedelta(days=d) for d in range(3, (today - coated).days, 30)]:
            e = exposure_on(telescope, coated, day)
            last_clean = max([c for c in clean_exposures if c <= e], default=0.0)
            value = r0 - rate * (e - recovery * last_clean) + rng.normal(0, 0.002)
            ReflectanceMeasurement.objects.create(
                mirror=mirror, measured_on=day, value=round(float(value), 4), position="mean of 5 marked points",
                instrument="handheld reflectometer RF-2 (invented)", taken_by=technician,
            )
    secondary = Mirror.objects.create(
        subsystem=subsystems[("T70", "Secondary mirror")], diameter_mm=220, thickness_mm=35, material="glass_ceramic",
        cell_mass_kg=6,  # invented: its holder with the tip-tilt plate, lifted with it
    )
    CoatingEvent.objects.create(mirror=secondary, coated_on=today - dt.timedelta(days=int(14 * 30.4)), metal="al")
    BookedRun.objects.create(
        site=site, title="Comet photometry campaign", starts_on=today + dt.timedelta(days=40),
        ends_on=today + dt.timedelta(days=58), blocked=True,
    )


# Past faults, each repaired on a corrective work order: (telescope, subsystem, days after the log starts,
# hours the repair took, title, findings). Invented: the fans wear out at a steady pace, the encoders and a
# servo drive fail now and then.
_REPAIRS = (
    ("T70", "Mirror cell fans", 180, 2.5, "Cell fan 3 stopped", "Bearing seized; fan replaced."),
    ("T70", "Mirror cell fans", 520, 2.0, "Cell fan 1 noisy and slow", "Bearing worn; fan replaced."),
    ("T70", "Mirror cell fans", 700, 3.0, "Cell fans tripping the breaker", "Fan 2 winding shorted; replaced."),
    ("T70", "Mirror cell fans", 1010, 2.0, "Cell fan 4 stopped", "Bearing seized; fan replaced."),
    ("R40", "Mirror cell fans", 330, 1.5, "Cell fan not turning", "Bearing seized; fan replaced."),
    ("R40", "Mirror cell fans", 560, 1.5, "Cell fan rattling", "Blade cracked at the hub; fan replaced."),
    ("R40", "Mirror cell fans", 940, 2.0, "Cell fan stalls when cold", "Bearing grease hardened; fan replaced."),
    ("T70", "Axis 1 encoder", 412, 4.0, "Axis 1 position jumps", "Read head dirty; scale and head cleaned, "
     "head realigned."),
    ("T70", "Axis 1 encoder", 877, 5.5, "Axis 1 encoder errors on slews", "Read-head cable chafed at the wrap; "
     "cable replaced."),
    ("R40", "Axis 2 encoder", 648, 3.0, "Axis 2 lost its index", "Index mark contaminated; scale cleaned."),
    ("R40", "Servo drives", 152, 6.0, "Axis 1 amplifier fault at power-up", "Amplifier replaced from spares, "
     "loop re-tuned."),
)


def _repairs(site, subsystems, users, start: dt.date) -> None:
    """Finished and countersigned corrective work orders for the faults above, each with its service record."""
    from observatory_ops.workorders import selectors
    from observatory_ops.workorders import services as workorders
    from observatory_ops.workorders.models import State

    engineer, technician = users["engineer"], users["technician"]
    for telescope, name, days, hours, title, findings in _REPAIRS:
        subsystem = subsystems[(telescope, name)]
        day = start + dt.timedelta(days=days)
        order = workorders.work_order_ad_hoc(site, [subsystem], title, engineer)
        reported = timezone.make_aware(dt.datetime.combine(day, dt.time(9, 0)), site.zone)
        order.created_at = order.issued_at = reported
        order.started_at = reported + dt.timedelta(hours=1)
        order.finished_at = order.started_at + dt.timedelta(hours=hours)
        order.countersigned_at = order.finished_at + dt.timedelta(hours=2)
        points = selectors.isolation_points(order)  # read while it is a draft, kept as work_order_finish keeps it
        order.isolation_at_finish = selectors.isolation_kept(points, selectors.isolation_gaps(order, points))
        order.state, order.actual_hours, order.findings = State.COUNTERSIGNED, hours, findings
        order.assignee = order.finished_by = technician
        order.countersigned_by = engineer
        order.save()
        ServiceRecord.objects.create(
            subsystem=subsystem, performed_on=day, performed_by=technician, hours_spent=hours, summary=title,
            findings=findings, work_order=order, created_by=technician,
        )


def _work_orders(site, users, today: dt.date) -> None:
    """Two open work orders from today's overdue items: one issued for tomorrow, one underway with the steps
    done under power, its isolation points and its lockout step ticked."""
    from observatory_ops.planning.models import PlanStatus
    from observatory_ops.workorders import services as workorders

    overdue = list(
        PlanStatus.objects.filter(site=site, status="overdue").select_related("plan").order_by("plan_id")[:3]
    )
    if len(overdue) < 3:
        return
    tomorrow = today + dt.timedelta(days=1)
    issued = workorders.work_order_from_due([s.plan for s in overdue[:2]], users["engineer"], tomorrow)
    issued.assignee = users["technician"]
    issued.save()
    workorders.work_order_move(issued, "issue", users["engineer"])
    underway = workorders.work_order_from_due([overdue[2].plan], users["engineer"], today)
    workorders.work_order_move(underway, "issue", users["engineer"])
    workorders.work_order_move(underway, "start", users["technician"])
    # On the tablet, in the order of the work: the steps done under power, then each isolation point as its lock
    # goes on and the lockout step, so the locked-out work is next (the service refuses any other sequence).
    # Without energy to isolate, only the first step is ticked.
    from observatory_ops.workorders.selectors import isolation_points

    found = workorders.isolated_steps(underway.step_list)
    lockout = found[0] if found is not None else None
    for index in range(lockout if lockout is not None else min(1, len(underway.step_list))):
        workorders.checklist_tick_set(underway, "step", index, True, users["technician"])
    if lockout is not None:
        for point in isolation_points(underway):
            workorders.checklist_tick_set(underway, "point", point.pk, True, users["technician"])
        workorders.checklist_tick_set(underway, "step", lockout, True, users["technician"])
