"""Speed of the Python bindings (never asserted in tests; run by hand):

    python crates/python/bench/bench.py

1. Python call overhead on the benchmark buck of benches/common (100 kHz,
   40 % duty, 47 µH, 2 Ω, 10,000 periods, everything recorded): the minimum
   wall time of `fluxstep.simulate` over several runs, against a plain Rust
   run of the same circuit timed inside Rust in the same process
   (`fluxstep._fluxstep._plain_run_seconds`), taken in turn; the ratio is the
   overhead.
   Wall time here depends on how the allocator hands out the run's fresh
   pages; freeing the previous result before each timed call instead of
   after it has measured up to 80 % slower on these shared machines.
2. Exact evaluation of 10^6 points of the inductor current (ns per point).
"""

import time

import numpy as np

import fluxstep


def best(f, n):
    times = []
    for _ in range(n):
        t0 = time.perf_counter()
        out = f()
        times.append(time.perf_counter() - t0)
    return min(times), out


def main():
    buck = (
        fluxstep.CircuitBuilder()
        .voltage_source("Vin", "in", "gnd", 12.0)
        .switch("S1", "in", "sw", "drive")
        .diode("D1", "gnd", "sw")
        .inductor("L1", "sw", "out", 47e-6, initial_current=2.4)
        .capacitor("C1", "out", "gnd", 100e-6, initial_voltage=4.8)
        .resistor("Rload", "out", "gnd", 2.0)
        .pwm("drive", 100e3, 0.4)
        .build()
    )
    stop = 10_000 * 1e-5
    # Python calls and plain Rust runs taken in turn, in this process.
    py_times, rust_times = [], []
    for _ in range(200):
        t0 = time.perf_counter()
        run = fluxstep.simulate(buck, stop)
        py_times.append(time.perf_counter() - t0)
        del run
        rust_times.append(fluxstep._fluxstep._plain_run_seconds(buck, stop))
    run = fluxstep.simulate(buck, stop)
    t, base = min(py_times), min(rust_times)
    n = run.stats["scheduled_events"] + run.stats["state_events"]
    print(f"simulate, 10,000 periods: {t * 1e3:.3f} ms ({n} events, {t * 1e9 / n:.1f} ns per event)")
    print(f"plain Rust run, same process: {base * 1e3:.3f} ms; overhead {100 * (t / base - 1):.1f} %")

    a, b = run.span
    pts = np.linspace(a, b, 1_000_000)
    t, v = best(lambda: run.waveform("L1.current", pts), 5)
    print(f"waveform, 10^6 points: {t * 1e3:.1f} ms, {t * 1e9 / len(pts):.1f} ns per point")


if __name__ == "__main__":
    main()
