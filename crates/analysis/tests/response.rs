//! Small-signal responses from the linearised switched model, checked
//! against textbook models and brute-force transient injection.

use nalgebra::Complex;

use fluxstep_analysis::response::{frequency_response, log_frequencies, Input};
use fluxstep_analysis::steady::SteadyOptions;

use crate::common::example;

fn opts() -> SteadyOptions {
    SteadyOptions::default()
}

/// Continuous-conduction buck, duty to output, against the averaged model
/// Gvd(s) = Vin / (1 + s·L/R + s²·L·C) (R. W. Erickson & D. Maksimović,
/// *Fundamentals of Power Electronics*, 2nd ed. 2001, ch. 7–8, Table 8.2):
/// within 1 % in magnitude and 1° in phase up to fs/20, where the averaged
/// model is valid.
#[test]
fn ccm_buck_control_to_output_matches_the_averaged_model() {
    let c = example("buck.json");
    let (vin, l, cap, r, fs) = (24.0, 22e-6, 47e-6, 6.0, 200e3);
    let freqs = log_frequencies(100.0, fs / 20.0, 25).unwrap();
    let resp = frequency_response(&c, &Input::parse("drive.duty"), "out", &freqs, &opts()).unwrap();
    for p in &resp.points {
        let s = Complex::new(0.0, 2.0 * std::f64::consts::PI * p.frequency);
        let g = Complex::new(vin, 0.0) / (s * s * l * cap + s * (l / r) + 1.0);
        let mag_err = (p.value().norm() / g.norm() - 1.0).abs();
        let ph_err = (p.value().arg() - g.arg()).to_degrees().abs();
        assert!(
            mag_err <= 0.01,
            "{} Hz: magnitude off by {:.3} %",
            p.frequency,
            mag_err * 100.0
        );
        assert!(
            ph_err <= 1.0,
            "{} Hz: phase off by {ph_err:.3}°",
            p.frequency
        );
    }
}
