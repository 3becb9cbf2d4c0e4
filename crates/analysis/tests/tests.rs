//! Integration tests of the analysis crate, one module per analysis.

/// Shared circuits and helpers.
mod common;
/// Core loss by the iGSE against the Steinmetz equation (sinusoidal
/// flux) and the piecewise-linear closed form (triangular flux).
mod core_loss;
/// Losses: the energy balance on every example circuit, conduction losses
/// of switches, diodes, ESR and winding resistance against closed forms,
/// jump energies, loads and efficiency, bad input.
mod losses;
/// Small-signal responses: the averaged CCM model, brute-force injection,
/// current-mode sampling poles, DCM, loop margins, bad input.
mod response;
/// Periodic steady state: agreement with long settled transients, Newton
/// iteration counts, the discontinuous-conduction ratio, current-mode
/// multipliers, saltation against finite differences, bad input.
mod steady;
/// Sweeps: same bits for any thread count and for merged shards, the buck's
/// CCM/DCM conversion ratios over a duty sweep, Monte Carlo statistics,
/// failing corners, bad input, and the committed JSON Schema.
mod sweep;
/// Junction temperature: Foster networks driven by the exact loss against
/// the steady rise, the step response and the periodic pulse-train ripple;
/// the warning above the maximum; bad input.
mod thermal;
/// Timing rules against closed-form timing (complementary pair dead times,
/// the DCM buck's diode conduction, RC band), one violated period among
/// 10,000, golden comparisons and their sentences.
mod timing;
