"""The ten-definition chain of tests/bench/cells/chain.hrw with pint on NumPy arrays, swept over
the input voltage: `python sweep_chain.py POINTS REPS` prints {"median_ns": …, "reps": …} for
the computation alone (the unit registry is made once, before timing)."""

import json
import statistics
import sys
import time

import numpy as np
import pint

ureg = pint.UnitRegistry()
Q_ = ureg.Quantity


def parallel(a, b):
    return 1 / (1 / a + 1 / b)


def chain(points):
    vin = Q_(np.linspace(7.0, 16.0, points), "V")
    iload = Q_(180, "mA")
    y1 = vin - Q_(5, "V")
    y2 = y1 * iload
    y3 = y2 + vin * Q_(4, "mA")
    y4 = y3 * (Q_(6, "K/W") + Q_(0.4, "K/W") + parallel(Q_(22, "K/W"), Q_(60, "K/W")))
    y5 = vin * (iload + Q_(4, "mA"))
    y6 = y5 - y3
    y7 = y6 / y5
    y8 = vin / (iload + Q_(4, "mA"))
    y9 = parallel(y8, Q_(470, "ohm"))
    y10 = y4 * Q_(10, "mW/K") + y7 * vin * vin / y9
    return y10.to("W")


def main():
    points, reps = int(sys.argv[1]), int(sys.argv[2])
    chain(1000)  # warm pint's caches, as a second run in a notebook would be
    times = []
    for _ in range(reps):
        t0 = time.perf_counter_ns()
        y = chain(points)
        times.append(time.perf_counter_ns() - t0)
    # The same formula by hand at the first point (vin = 7 V), so a wrong chain shows up.
    want = (2 * 0.18 + 7 * 0.004) * (6.4 + 1 / (1 / 22 + 1 / 60)) * 0.010 + (
        (7 * 0.184 - (2 * 0.18 + 7 * 0.004)) / (7 * 0.184)
    ) * 49 / (1 / (1 / (7 / 0.184) + 1 / 470))
    if abs(y.magnitude[0] - want) > 1e-9 * abs(want):
        sys.exit(f"sweep_chain: y10(7 V) = {y.magnitude[0]} W, expected {want} W")
    print(json.dumps({"median_ns": statistics.median(times), "min_ns": min(times), "reps": reps}))


if __name__ == "__main__":
    main()
