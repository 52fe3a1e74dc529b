import json

from django.core.management.base import BaseCommand, CommandError

from observatory_ops.calc.lifting import DENSITY, lift_figures
from observatory_ops.workorders.cautions import PRECEDENCE_STATEMENT, cautions_for


class Command(BaseCommand):
    help = (
        "Mirror mass, total suspended load and sling leg tension for a mirror lift (numbers only: a competent "
        "person decides whether a lift is safe)."
    )

    def add_arguments(self, parser):
        parser.add_argument("--diameter-mm", type=float, required=True)
        parser.add_argument("--thickness-mm", type=float, required=True)
        parser.add_argument("--hole-mm", type=float, default=0.0)
        parser.add_argument("--material", required=True, help=f"one of: {', '.join(DENSITY)}")
        parser.add_argument("--lightweighting", type=float, default=0.0, help="fraction of the blank removed")
        parser.add_argument("--fixture-kg", type=float, default=None,
                            help="cell / fixture mass lifted with the mirror (0: none); not given, the figures are the "
                                 "mirror alone, with a warning")
        parser.add_argument("--legs", type=int, required=True)
        parser.add_argument("--angle-deg", type=float, required=True, help="leg angle from the horizontal")
        parser.add_argument("--wll-kg", type=float, default=None, help="working load limit of one leg")
        parser.add_argument("--json", action="store_true", dest="as_json")

    def handle(self, *args, **o):
        caution = cautions_for(["suspended_load"])[0]
        try:
            f = lift_figures(
                diameter_mm=o["diameter_mm"], thickness_mm=o["thickness_mm"], material=o["material"],
                hole_mm=o["hole_mm"], fixture_kg=o["fixture_kg"], legs=o["legs"], angle_deg=o["angle_deg"],
                wll_kg=o["wll_kg"], lightweighting_fraction=o["lightweighting"],
            )
        except ValueError as exc:
            raise CommandError(str(exc)) from None
        result = {
            "mirror_kg": round(f.mirror_kg, 3),
            "fixture_kg": None if f.fixture_not_entered else round(f.fixture_kg, 3),
            "total_kg": round(f.total_kg, 3),
            "total_lb": round(f.total_lb, 3),
            "legs_bearing": f.legs_bearing,
            "load_factor": round(f.load_factor, 4),
            "leg_tension_kg": round(f.leg_tension_kg, 3),
            "leg_tension_lb": round(f.leg_tension_lb, 3),
            "leg_tension_n": round(f.leg_tension_n, 1),  # the kg above are a load, as sling tags rate limits
            "margin": None if f.margin is None else round(f.margin, 3),
            "warnings": list(f.warnings),
            "checks": list(f.checks),
            "caution": caution.text,
            "precedence": PRECEDENCE_STATEMENT,
        }
        if o["as_json"]:
            self.stdout.write(json.dumps(result, indent=1))
            return
        for key in ("mirror_kg", "fixture_kg", "total_kg", "total_lb", "legs_bearing", "load_factor",
                    "leg_tension_kg", "leg_tension_lb", "leg_tension_n", "margin"):
            self.stdout.write(f"{key:<16} {result[key]}")
        for w in f.warnings:
            self.stdout.write(f"WARNING: {w}")
        self.stdout.write("A competent person must check:")
        for c in f.checks:
            self.stdout.write(f"  - {c}")
        self.stdout.write(f"CAUTION ({caution.standard}): {caution.text}")
        self.stdout.write(PRECEDENCE_STATEMENT)
