//! Stage 2 of an interval: the exact advance over its length, into
//! `z_next`, from the cheapest exact source there is — an exponential
//! cached for a span of the schedule, one cached for a length that came
//! back, a nearby cached length and a short Taylor remainder, or Taylor
//! sub-steps (one exponential for a stiff span).

use super::*;
use crate::propagate::{Spectrum, PHASE_LIMIT};

impl Simulator {
    /// z_next = e^{M·len} z in mode `mi` (matrix `m`) by an exponential
    /// cached for a length that came back; false (nothing advanced) if
    /// there is none yet. A length that is not a span of the schedule (it
    /// starts or ends at a located event) is cached when the same bits
    /// come back: once a converter in discontinuous conduction settles,
    /// its located instants jitter only in their last bits, so the lengths
    /// take a few distinct values, while a length seen once costs no
    /// exponential. The oldest entry makes room for a new one, so the
    /// lengths of the settling transient do not keep out those of the
    /// steady state.
    pub(super) fn advance_repeated(&mut self, mi: usize, m: &DMatrix<f64>, len: f64) -> bool {
        let bits = len.to_bits();
        let cache = &mut self.modes.caches[mi];
        if let Some(phi) = cache.find_repeated(bits) {
            self.stats.cache_hits += 1;
            propagate::matvec(phi, self.z.as_slice(), self.z_next.as_mut_slice());
            return true;
        }
        if !self.shortcuts.repeated_lengths {
            return false;
        }
        if !cache.misses.contains(&bits) {
            cache.misses.rotate_right(1);
            cache.misses[0] = bits;
            return false;
        }
        self.stats.exponentials += 1;
        let phi = propagate::expm(m, len);
        propagate::matvec(&phi, self.z.as_slice(), self.z_next.as_mut_slice());
        if cache.repeated.len() < MAX_AGAIN {
            cache.repeated.push((bits, phi));
        } else {
            cache.repeated[cache.repeated_next] = (bits, phi);
            cache.repeated_next = (cache.repeated_next + 1) % MAX_AGAIN;
        }
        true
    }

    /// Advance over `len` in mode `mi`, into `z_next`, from a cached
    /// exponential of a nearby length h₀ (|len − h₀| ≤ len/4, the nearest
    /// one): e^{M·len} z = e^{M(len−h₀)} (e^{Mh₀} z), the short remainder
    /// by Taylor terms. The lengths of a converter under a controller move
    /// by a little every period, so their exponentials are not cached, but
    /// the remainder needs a few terms where the whole length needs a
    /// dozen or more. As exact as the Taylor path (to rounding; a test
    /// compares the two to 1e-12). False if no cached length is near.
    pub(super) fn advance_near(&mut self, mi: usize, m: &Mode, len: f64) -> bool {
        if !self.shortcuts.nearby_lengths {
            return false;
        }
        let cache = &self.modes.caches[mi];
        let mut best: Option<(f64, &DMatrix<f64>)> = None;
        for (b, phi) in cache.scheduled.iter().chain(&cache.repeated) {
            let d = len - f64::from_bits(*b);
            if d.abs() <= 0.25 * len && best.is_none_or(|(bd, _)| d.abs() < bd.abs()) {
                best = Some((d, phi));
            }
        }
        let Some((delta, phi)) = best else {
            return false;
        };
        self.stats.near_steps += 1;
        propagate::matvec(phi, self.z.as_slice(), self.buf.z_try.as_mut_slice());
        propagate::advance_into(
            &m.m,
            m.live,
            m.rate,
            self.buf.z_try.as_slice(),
            delta,
            self.z_next.as_mut_slice(),
            &mut self.buf.advance,
        );
        true
    }

    /// Exact advance over `h` in the present mode, into `z_next`.
    pub(super) fn step(&mut self, h: f64, cacheable: bool) {
        let mi = self.mode as usize;
        let bits = h.to_bits();
        if let Some(phi) = self.modes.caches[mi].find_scheduled(bits) {
            self.stats.cache_hits += 1;
            propagate::matvec(phi, self.z.as_slice(), self.z_next.as_mut_slice());
            return;
        }
        let stiff = propagate::substeps(self.modes[mi].rate, h) > propagate::STIFF_SUBSTEPS;
        if stiff {
            // Out of the hot loop: only lengths without a cached
            // exponential get here. A refusal leaves NaN, which
            // `check_finite` turns into the stored diagnostic.
            if let Err(e) = self.check_resolvable(h) {
                self.z_next.fill(f64::NAN);
                self.refused = Some(e);
                return;
            }
        }
        // The modes are borrowed out of `self` meanwhile: cloning the
        // `Arc` cost two atomic operations at every step of a circuit
        // with transition models (four lengths a period are not cached).
        let modes = std::mem::take(&mut self.modes.list);
        self.step_uncached(&modes[mi], h, cacheable, stiff);
        self.modes.list = modes;
    }

    /// The rest of `step` where no span of the schedule is cached (the
    /// modes are borrowed out of `self`).
    fn step_uncached(&mut self, m: &Mode, h: f64, cacheable: bool, stiff: bool) {
        let mi = self.mode as usize;
        let bits = h.to_bits();
        if cacheable && self.modes.caches[mi].scheduled.len() < 16 {
            self.stats.exponentials += 1;
            let phi = propagate::expm(&m.m, h);
            propagate::matvec(&phi, self.z.as_slice(), self.z_next.as_mut_slice());
            self.modes.caches[mi].scheduled.push((bits, phi));
            return;
        }
        // Lengths that come back, whether spans of the schedule (once 16
        // of them are cached: a controller moves the edges) or not.
        if (!cacheable || self.shortcuts.nearby_lengths) && self.advance_repeated(mi, &m.m, h) {
            return;
        }
        if stiff {
            // One exponential (a near length's remainder could be a step
            // back over a fast decay).
            self.stats.stiff_spans += 1;
            self.stats.exponentials += 1;
        } else if self.advance_near(mi, m, h) {
            return;
        }
        propagate::advance_into(
            &m.m,
            m.live,
            m.rate,
            self.z.as_slice(),
            h,
            self.z_next.as_mut_slice(),
            &mut self.buf.advance,
        );
    }

    /// The present mode's spectrum, computed at its first stiff span.
    pub(super) fn spectrum(&mut self) -> Option<Arc<Spectrum>> {
        let mi = self.mode as usize;
        if self.modes.caches[mi].spectrum.is_none() {
            let sp = Spectrum::of(&self.modes[mi].m).map(Arc::new);
            self.modes.caches[mi].spectrum = Some(sp);
        }
        self.modes.caches[mi].spectrum.clone().flatten()
    }

    /// Before a stiff span of length `h`: stops the run where the mode
    /// oscillates faster than f64 time and arithmetic can follow over it
    /// (see `Spectrum::unresolved`), naming the state with the smallest
    /// energy scale (√L or √C: the smallest inductance or capacitance
    /// taking part), whose value makes it so.
    ///
    /// # Errors
    ///
    /// [`SolverError::Unsupported`] naming that state and the rate.
    pub(super) fn check_resolvable(&mut self, h: f64) -> Result<(), SolverError> {
        let Some(sp) = self.spectrum() else {
            return Ok(());
        };
        let Some(w) = sp.unresolved(h, self.t + h) else {
            return Ok(());
        };
        Err(self.too_fast(w, h))
    }

    #[cold]
    #[inline(never)]
    fn too_fast(&self, w: f64, h: f64) -> SolverError {
        let mode = &self.modes[self.mode as usize];
        let nx = self.cc.n_x;
        let who = (0..nx.min(self.cc.x_scale.len()))
            .filter(|&i| mode.m.row(i).iter().any(|v| *v != 0.0))
            .min_by(|&a, &b| self.cc.x_scale[a].total_cmp(&self.cc.x_scale[b]))
            .map(|i| self.cc.state_names[i].clone())
            .unwrap_or_else(|| "a state".into());
        SolverError::Unsupported {
            time: self.t,
            pattern: pattern_text(&self.cc, self.key),
            reason: format!(
                "the circuit oscillates at {w:.3e} rad/s in this pattern, too fast to follow \
                 in 64-bit time and arithmetic over {h:.3e} s up to t = {:.3e} s (phase error \
                 above {PHASE_LIMIT:e} rad); the fastest state is {who}: check its value",
                self.t + h
            ),
        }
    }
}

/// Scratch space of the stages: nothing in it lives from one call to
/// the next, it only saves allocations.
pub(super) struct Buffers {
    /// Scratch: the candidate state of a pattern under test.
    pub(super) z_try: DVector<f64>,
    pub(super) advance: crate::propagate::Scratch,
    pub(super) terms: crate::propagate::TaylorTerms,
    /// Scratch of event location: start state of a sub-interval and a
    /// guard's Taylor coefficients.
    pub(super) za: DVector<f64>,
    pub(super) coef: Vec<f64>,
}
