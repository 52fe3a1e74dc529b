import json
import math

from django.core.management.base import BaseCommand, CommandError

from observatory_ops.mirrors import services
from observatory_ops.mirrors.models import Mirror


def _round(value, digits=5):
    return None if value is None or (isinstance(value, float) and not math.isfinite(value)) else round(value, digits)


class Command(BaseCommand):
    help = "Fresh band reflectance, fitted decline, current estimate, recoat threshold and crossing date of a mirror."

    def add_arguments(self, parser):
        parser.add_argument("subsystem_id", type=int)
        parser.add_argument("--json", action="store_true", dest="as_json")

    def handle(self, *args, subsystem_id, as_json, **o):
        mirror = Mirror.objects.select_related("subsystem__telescope__site").filter(subsystem_id=subsystem_id).first()
        if mirror is None:
            raise CommandError(f"subsystem {subsystem_id} has no mirror record (geometry and coating history)")
        state = services.mirror_forecast(mirror)
        train = services.throughput(mirror.subsystem.telescope)
        fit = state.fit
        result = {
            "subsystem": str(mirror),
            "coated_on": state.coated_on.isoformat() if state.coated_on else None,
            "recipe": state.recipe,
            "fresh_band_reflectance": _round(state.fresh_band),
            "fit": None if fit is None else {
                "r0": _round(fit.r0), "r0_sigma": _round(fit.r0_sigma),
                "rate_per_dust_hour": _round(fit.rate_per_hour, 9), "rate_sigma": _round(fit.rate_sigma, 9),
                "recovery_fraction": _round(state.recovery_fraction), "recovery_sigma": _round(state.recovery_sigma),
                "recovery_note": state.recovery_note,
                "n_points": fit.n_points, "residual_rms": _round(fit.residual_rms, 6),
            },
            "fit_note": state.fit_note,
            "cleaning_note": state.cleaning_note,
            "exposure_now_dust_hours": _round(state.exposure_now_h, 2),
            "current_estimate": _round(state.current),
            "threshold": _round(state.threshold),
            "threshold_basis": state.threshold_basis,
            "crossing_date": state.crossing.isoformat() if state.crossing else None,
            "crossing_earliest": state.crossing_earliest.isoformat() if state.crossing_earliest else None,
            "crossing_latest": state.crossing_latest.isoformat() if state.crossing_latest else None,
            "throughput_loss_mag": _round(train.loss_mag, 4),
            "throughput_incomplete": train.incomplete_note,
            "optical_train": [
                {"subsystem": str(m.subsystem), "reflectance_now": _round(m.now), "reflectance_fresh": _round(m.fresh),
                 "source": m.source, "basis": m.basis}
                for m in train.mirrors
            ],
        }
        if as_json:
            self.stdout.write(json.dumps(result, indent=1))
            return
        if fit is not None:  # for a person: the recovery as a figure, or in words why there is none
            note = result["fit"].pop("recovery_note")
            if state.recovery_fraction is None:
                result["fit"].update(recovery_fraction=note, recovery_sigma="-")
        result["optical_train"] = "; ".join(  # for a person: one clause per mirror, not a list of dicts
            f"{m['subsystem']} {m['reflectance_now'] if m['reflectance_now'] is not None else '-'}: {m['basis']}"
            for m in result["optical_train"]
        )
        for key, value in result.items():
            self.stdout.write(f"{key:<26} {value}")
