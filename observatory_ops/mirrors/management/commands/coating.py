import json
from pathlib import Path

from django.core.management.base import BaseCommand, CommandError

from observatory_ops.calc.coating import MATERIALS, coating_curve
from observatory_ops.logbook.quantities import reflectance_text
from observatory_ops.mirrors import layers_text, response_csv


class Command(BaseCommand):
    help = "Normal-incidence reflectance of a fresh metal coating under dielectric overcoats (characteristic-matrix)."

    def add_arguments(self, parser):
        parser.add_argument("--metal", required=True, help="al or ag")
        parser.add_argument("--layer", action="append", default=[], help=f"overcoats as {layers_text.FORMAT}, or "
                            f"--layer once per layer; materials: {', '.join(MATERIALS)}")
        parser.add_argument("--from", dest="from_nm", type=float, default=400.0)
        parser.add_argument("--to", dest="to_nm", type=float, default=1000.0)
        parser.add_argument("--step", dest="step_nm", type=float, default=10.0)
        parser.add_argument("--response", help="CSV with columns wavelength_nm,weight to weight the band mean")
        parser.add_argument("--json", action="store_true", dest="as_json")

    def handle(self, *args, **o):
        try:
            layers = [layer for text in o["layer"] for layer in layers_text.parse(text)]
        except ValueError as exc:
            raise CommandError(f"--layer: {exc}") from None
        try:
            response = response_csv.parse(Path(o["response"]).read_bytes()) if o["response"] else None
            result = coating_curve(o["metal"], layers, o["from_nm"], o["to_nm"], o["step_nm"], response=response)
        except OSError as exc:
            raise CommandError(f"--response: {exc.strerror}: {o['response']}") from None
        except ValueError as exc:
            raise CommandError(str(exc)) from None
        if o["as_json"]:
            self.stdout.write(json.dumps(result))
            return
        self.stdout.write(f"band mean {o['from_nm']:g}-{o['to_nm']:g} nm: {reflectance_text(result['band_mean'])}")
        for point in result["curve"]:
            self.stdout.write(f"{point['wavelength_nm']:8.1f} nm  {reflectance_text(point['reflectance'])}")
