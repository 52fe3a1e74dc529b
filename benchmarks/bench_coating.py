"""Time a fresh-coating reflectance curve: 400-1000 nm every 1 nm, aluminium under 100 nm of SiO2.

Run from the repository root: ``python -m benchmarks.bench_coating``. Target: 50 ms per curve or less.
"""

import statistics
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))  # run as a plain script too

from observatory_ops.calc.coating import Layer, coating_curve

TARGET_MS = 50.0
REPEATS = 50


def curve_ms() -> float:
    start = time.perf_counter()
    coating_curve("al", [Layer("SiO2", 100.0)], from_nm=400.0, to_nm=1000.0, step_nm=1.0)
    return 1000.0 * (time.perf_counter() - start)


def main() -> None:
    first = curve_ms()  # includes reading the embedded optical-constant files once
    timings = [curve_ms() for _ in range(REPEATS)]
    print("coating curve, Al + 100 nm SiO2, 400-1000 nm at 1 nm (601 wavelengths)")
    print(f"  first call (reads data files): {first:8.2f} ms   target <= {TARGET_MS:.0f} ms")
    print(f"  median of {REPEATS} calls:           {statistics.median(timings):8.2f} ms   target <= {TARGET_MS:.0f} ms")
    print(f"  slowest of {REPEATS} calls:          {max(timings):8.2f} ms   target <= {TARGET_MS:.0f} ms")


if __name__ == "__main__":
    main()
