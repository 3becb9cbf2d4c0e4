//! The exact solver against a general-purpose adaptive Runge–Kutta solver
//! (Dormand–Prince 5(4) from the `ode_solvers` crate) run at tight tolerance.

use fluxstep_netlist::Circuit;
use fluxstep_solver::{simulate, Options};
use ode_solvers::{Dopri5, System, Vector2};

struct Buck {
    vin: f64,
    l: f64,
    c: f64,
    r: f64,
    on: bool,
}

impl System<f64, Vector2<f64>> for Buck {
    fn system(&self, _t: f64, x: &Vector2<f64>, dx: &mut Vector2<f64>) {
        // Switch on: v_L = Vin − v_C; off (diode conducting): v_L = −v_C.
        let vl = if self.on { self.vin - x[1] } else { -x[1] };
        dx[0] = vl / self.l;
        dx[1] = (x[0] - x[1] / self.r) / self.c;
    }
}

/// A buck that stays in continuous conduction for 20 periods, advanced
/// piecewise by Dormand–Prince at rtol = atol = 1e-12, agrees with the exact
/// solution to 1e-7 (DESIGN.md; the two differ only by the integrator's error).
#[test]
fn buck_agrees_with_adaptive_runge_kutta() {
    let (vin, f, d, l, c, r) = (12.0, 100e3, 0.4, 47e-6, 100e-6, 2.0);
    let circ = Circuit::builder()
        .voltage_source("Vin", "in", "gnd", vin)
        .switch("S1", "in", "sw", "drive")
        .diode("D1", "gnd", "sw")
        .inductor_with_current("L1", "sw", "out", l, 2.0)
        .capacitor_with_voltage("C1", "out", "gnd", c, 4.0)
        .resistor("Rload", "out", "gnd", r)
        .pwm("drive", f, d)
        .build()
        .unwrap();
    let periods = 20;
    let t_end = periods as f64 / f;
    let run = simulate(&circ, t_end, Options::default()).unwrap();
    let w = &run.waveform;
    let il = w.output("L1.current").unwrap();
    let vc = w.output("C1.voltage").unwrap();
    let mut x = Vector2::new(2.0, 4.0);
    let mut worst: f64 = 0.0;
    for k in 0..periods {
        for (on, a, b) in [(true, 0.0, d), (false, d, 1.0)] {
            let (t0, t1) = ((k as f64 + a) / f, (k as f64 + b) / f);
            let mut rk = Dopri5::new(
                Buck { vin, l, c, r, on },
                t0,
                t1,
                (t1 - t0) / 4.0,
                x,
                1e-12,
                1e-12,
            );
            rk.integrate().unwrap();
            x = *rk.y_out().last().unwrap();
            let tm = t1 * (1.0 - 1e-15);
            worst = worst.max((w.value(il, tm).unwrap() - x[0]).abs() / 2.0);
            worst = worst.max((w.value(vc, tm).unwrap() - x[1]).abs() / 4.0);
        }
    }
    assert!(worst < 1e-7, "largest relative difference {worst:e}");
}
