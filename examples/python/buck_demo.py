"""Run the demo buck (examples/circuits/buck.json), print its summary and,
when matplotlib is installed (``pip install fluxstep[plot]``), save a figure
of the last recorded cycles: inductor current, switch node, output.

    python examples/python/buck_demo.py [figure.png]
"""

import pathlib
import sys

import numpy as np

import fluxstep

HERE = pathlib.Path(__file__).resolve().parent
CIRCUIT = HERE.parent / "circuits" / "buck.json"


def main(figure: str = "buck_demo.png") -> None:
    buck = fluxstep.Circuit.from_file(CIRCUIT)
    run = fluxstep.simulate(buck)  # stop time, window and outputs from the file
    s = run.summary
    a, b = s["window"]
    print(f"buck: {s['stop_time'] * 1e3:g} ms simulated, window {a * 1e3:g} … {b * 1e3:g} ms, "
          f"{s['events']} events")
    print(f"  {'output':<12} {'average':>10} {'rms':>10} {'min':>10} {'max':>10} {'ripple':>10}")
    for m in s["measurements"]:
        print(f"  {m['output']:<12} {m['average']:>10.4g} {m['rms']:>10.4g} {m['min']:>10.4g} "
              f"{m['max']:>10.4g} {m['peak_to_peak']:>10.4g}  {m['unit']}")
    ss = fluxstep.steady.find(buck)
    print(f"steady state: {ss.newton_steps} Newton step(s), residual {ss.residual:.1e}, "
          f"{'stable' if ss.is_stable() else 'unstable'}; "
          f"average output {ss.measurement('out')['average']:.6f} V")

    try:
        import matplotlib

        matplotlib.use("Agg")
        import matplotlib.pyplot as plt
    except ImportError:
        print("matplotlib is not installed: no figure (pip install matplotlib)")
        return
    fig, axes = plt.subplots(3, 1, sharex=True, figsize=(8, 6))
    for ax, (name, unit) in zip(axes, [("L1.current", "A"), ("sw", "V"), ("out", "V")]):
        t, v = run.vertices(name, interior=8)  # exact corners: steps stay vertical
        ax.plot(t * 1e6, v, lw=1)
        ax.set_ylabel(f"{name} ({unit})")
        ax.grid(True, alpha=0.3)
    axes[-1].set_xlabel("time (µs)")
    fig.suptitle("Asynchronous buck, 24 V to 12 V, 200 kHz")
    fig.tight_layout()
    fig.savefig(figure, dpi=120)
    print(f"figure written: {figure}")


if __name__ == "__main__":
    main(*sys.argv[1:])
