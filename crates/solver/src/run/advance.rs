//! Stage 2 of an interval: the exact advance over its length, into
//! `z_next`, from the cheapest exact source there is — an exponential
//! cached for a span of the schedule, one cached for a length that came
//! back, a nearby cached length and a short Taylor remainder, or Taylor
//! sub-steps (one exponential for a stiff span).

use super::modeset::{ModeCache, MAX_NEAR};
use super::*;
use crate::envelope::Envelope;
use crate::near::{NearAnchor, NearExp, Served, NEAR_REACH};
use crate::propagate::{Spectrum, PHASE_LIMIT};

impl Simulator {
    /// Exact advance over `h` in the present mode, into `z_next`: the
    /// stage's entry, which hands the mode's cache only the state, the
    /// counters and the scratch space (`ModeCache::advance_uncached`).
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
        self.step_uncached(h, cacheable, stiff);
    }

    /// [`Simulator::step`] past its look-up of the schedule's spans (a
    /// miss) and its stiff check (`stiff`, a span found resolvable): for
    /// the lane, which has made both itself.
    pub(super) fn step_uncached(&mut self, h: f64, cacheable: bool, stiff: bool) {
        let mi = self.mode as usize;
        let (m, cache) = self.modes.entry(mi);
        cache.advance_uncached(
            m,
            Span {
                h,
                cacheable,
                stiff,
            },
            self.shortcuts,
            Io {
                z: self.z.as_slice(),
                z_next: self.z_next.as_mut_slice(),
                stats: &mut self.stats,
                buf: &mut self.buf,
            },
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

    /// The energy envelope (see `crate::envelope`) of the present mode,
    /// `mode` (passed in: `locate` holds the list of modes), cached.
    pub(super) fn envelope(&mut self, mode: &Mode) -> Option<Arc<Envelope>> {
        let mi = self.mode as usize;
        if self.modes.caches[mi].envelope.is_none() {
            let env = Envelope::of(&mode.m, &mode.weight).map(Arc::new);
            self.modes.caches[mi].envelope = Some(env);
        }
        self.modes.caches[mi].envelope.clone().flatten()
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

/// An interval to advance: its length, whether it is a span of the
/// schedule (both ends periodic edges: its exponential may be cached as
/// such), and whether it is stiff (more Taylor sub-steps than
/// [`propagate::STIFF_SUBSTEPS`]).
#[derive(Clone, Copy)]
pub(super) struct Span {
    pub(super) h: f64,
    pub(super) cacheable: bool,
    pub(super) stiff: bool,
}

/// What stage 2 is handed besides the mode and its cache: the state at
/// the start, where the state at the end goes, the counters and the
/// scratch space. Nothing else of the simulator.
pub(super) struct Io<'a> {
    /// The state at the start of the interval.
    pub(super) z: &'a [f64],
    /// Where the state at its end goes.
    pub(super) z_next: &'a mut [f64],
    pub(super) stats: &'a mut Stats,
    pub(super) buf: &'a mut Buffers,
}

impl ModeCache {
    /// The rest of `step` where no span of the schedule is cached: a new
    /// span's exponential (16 at most), a length that came back, a nearby
    /// length and a short remainder, or Taylor sub-steps (one exponential
    /// for a stiff span), in mode `m` whose cache this is.
    fn advance_uncached(&mut self, m: &Mode, span: Span, shortcuts: Shortcuts, io: Io<'_>) {
        let Span {
            h,
            cacheable,
            stiff,
        } = span;
        if cacheable && self.scheduled.len() < 16 {
            io.stats.exponentials += 1;
            let phi = propagate::expm(&m.m, h);
            propagate::matvec(&phi, io.z, io.z_next);
            self.scheduled.push((h.to_bits(), phi));
            return;
        }
        // Lengths that come back, whether spans of the schedule (once 16
        // of them are cached: a controller moves the edges) or not: to
        // the bit, else nearly (a polynomial about a nearby one), else
        // cached when they come back to the bit.
        if !cacheable || shortcuts.nearby_lengths {
            if let Some(phi) = self.find_repeated(h.to_bits()) {
                io.stats.cache_hits += 1;
                propagate::matvec(phi, io.z, io.z_next);
                return;
            }
            // A length back to the bit is cached below (a settled
            // converter's lengths jitter among a few values, each then one
            // product); one only near another takes the polynomial.
            let again = shortcuts.repeated_lengths && self.misses.contains(&h.to_bits());
            if shortcuts.nearby_lengths
                && !stiff
                && !again
                && self.advance_polynomial(
                    m,
                    h,
                    (io.z, &mut *io.z_next),
                    io.stats,
                    (io.buf.z_try.as_mut_slice(), io.buf.za.as_mut_slice()),
                )
            {
                if shortcuts.repeated_lengths {
                    self.note_miss(h.to_bits());
                }
                return;
            }
            if self.advance_repeated(
                &m.m,
                h,
                (io.z, &mut *io.z_next),
                io.stats,
                shortcuts.repeated_lengths,
            ) {
                return;
            }
        }
        if stiff {
            // One exponential (a near length's remainder could be a step
            // back over a fast decay).
            io.stats.stiff_spans += 1;
            io.stats.exponentials += 1;
        } else if shortcuts.nearby_lengths
            && self.advance_near(m, h, io.z, io.z_next, io.stats, io.buf)
        {
            return;
        }
        m.advance_into(io.z, h, io.z_next, &mut io.buf.advance);
    }

    /// z_next = e^{M·len} z (`m` is M, `(z, z_next)` the states) by an
    /// exponential cached for a length that came back; false (nothing
    /// advanced) if there is none yet. With `make`, a length that is not
    /// a span of the schedule (it starts or ends at a located event) is
    /// cached when the same bits come back: once a converter in
    /// discontinuous conduction settles, its located instants jitter only
    /// in their last bits, so the lengths take a few distinct values,
    /// while a length seen once costs no exponential. The oldest entry
    /// makes room for a new one, so the lengths of the settling transient
    /// do not keep out those of the steady state.
    pub(super) fn advance_repeated(
        &mut self,
        m: &DMatrix<f64>,
        len: f64,
        (z, z_next): (&[f64], &mut [f64]),
        stats: &mut Stats,
        make: bool,
    ) -> bool {
        let bits = len.to_bits();
        if let Some(phi) = self.find_repeated(bits) {
            stats.cache_hits += 1;
            propagate::matvec(phi, z, z_next);
            return true;
        }
        if !make {
            return false;
        }
        if !self.misses.contains(&bits) {
            self.note_miss(bits);
            return false;
        }
        stats.exponentials += 1;
        let phi = if let Some(near) = self.near.iter().find(|e| e.serves(len)) {
            // Near the centre of a polynomial (a converter still
            // settling): its terms summed as a matrix.
            near.base.matrix(len - near.base.h0)
        } else {
            let reach = propagate::SHIFT_REACH / propagate::norm1(m);
            match self.nearest(len, reach) {
                // Rounding jitter of a cached length (a discontinuous
                // buck's located lengths past 10,000 periods take more
                // distinct values than the cache holds): its exponential
                // shifted, a few products of small matrices where a fresh
                // one took fifty thousand instructions at three states.
                Some((delta, phi0)) => propagate::expm_shifted(phi0, m, delta),
                None => propagate::expm(m, len),
            }
        };
        propagate::matvec(&phi, z, z_next);
        if self.repeated.len() < MAX_AGAIN {
            self.repeated.push((bits, phi));
        } else {
            self.repeated[self.repeated_next] = (bits, phi);
            self.repeated_next = (self.repeated_next + 1) % MAX_AGAIN;
        }
        true
    }

    /// Remembers the bits of a length advanced without an exponential of
    /// its own, to cache one if it comes back (the oldest of
    /// [`REPEAT_RING`](super::modeset::REPEAT_RING) is forgotten).
    fn note_miss(&mut self, bits: u64) {
        self.misses.rotate_right(1);
        self.misses[0] = bits;
    }

    /// Advance over `len` in mode `m`, from `z` into `z_next`, by the
    /// polynomial about a nearby length that serves it (see
    /// [`NearExp`]); false (nothing advanced) where none does or it
    /// cannot vouch for the state. Where none serves and `len` lies within
    /// half a reach of a length advanced lately without a cached
    /// exponential (the lengths to and from a located instant of a
    /// converter that settles, new every period but close to one
    /// another), a polynomial about `len` is made, one exponential: the
    /// first at once, each later one once those made so far have served
    /// [`PAYBACK`] lengths each. Lengths scattered wider than the reach
    /// make one and then few, and a mode that gains nothing keeps one
    /// polynomial's memory (7n² numbers; a twelve-phase converter visits
    /// hundreds of modes).
    fn advance_polynomial(
        &mut self,
        m: &Mode,
        len: f64,
        (z, z_next): (&[f64], &mut [f64]),
        stats: &mut Stats,
        scratch: (&mut [f64], &mut [f64]),
    ) -> bool {
        if let Some(near) = self.near.iter_mut().find(|e| e.serves(len)) {
            match near.advance(&m.m, len, (z, z_next), &m.weight, scratch) {
                Served::Exact => stats.cache_hits += 1,
                Served::Near => stats.near_steps += 1,
                Served::Refused => return false,
            }
            self.near_served += 1;
            return true;
        }
        if self.near_made >= 1 && self.near_served < PAYBACK * self.near_made {
            return false;
        }
        let reach = NEAR_REACH / propagate::norm1(&m.m);
        let bits = len.to_bits();
        let close = self.misses.iter().any(|&b| {
            let l = f64::from_bits(b);
            b != bits && (l - len).abs() <= 0.5 * reach
        });
        if !close {
            return false;
        }
        stats.exponentials += 1;
        let near = NearAnchor::new(NearExp::new(&m.m, len));
        propagate::matvec(&near.base.phi, z, z_next);
        if self.near.len() < MAX_NEAR {
            self.near.push(near);
        } else {
            self.near[self.near_next] = near;
            self.near_next = (self.near_next + 1) % MAX_NEAR;
        }
        self.near_made += 1;
        true
    }

    /// Advance over `len` in mode `m`, from `z` into `z_next`, from a
    /// cached exponential of a nearby length h₀ (|len − h₀| ≤ len/4, the
    /// nearest one): e^{M·len} z = e^{M(len−h₀)} (e^{Mh₀} z), the short
    /// remainder by Taylor terms. The lengths of a converter under a
    /// controller move by a little every period, so their exponentials
    /// are not cached, but the remainder needs a few terms where the whole
    /// length needs a dozen or more. As exact as the Taylor path (to
    /// rounding; a test compares the two to 1e-12). False if no cached
    /// length is near.
    fn advance_near(
        &self,
        m: &Mode,
        len: f64,
        z: &[f64],
        z_next: &mut [f64],
        stats: &mut Stats,
        buf: &mut Buffers,
    ) -> bool {
        let Some((delta, phi)) = self.nearest(len, 0.25 * len) else {
            return false;
        };
        stats.near_steps += 1;
        propagate::matvec(phi, z, buf.z_try.as_mut_slice());
        m.advance_into(buf.z_try.as_slice(), delta, z_next, &mut buf.advance);
        true
    }

    /// The cached length nearest to `len` within `reach` (scheduled spans
    /// first, then lengths that came back, then the centres of the
    /// polynomials about nearby lengths; the first of equals), as
    /// (len − h₀, e^{M·h₀}).
    fn nearest(&self, len: f64, reach: f64) -> Option<(f64, &DMatrix<f64>)> {
        let mut best: Option<(f64, &DMatrix<f64>)> = None;
        let cached = self.scheduled.iter().chain(&self.repeated);
        let near = self.near.iter().map(|e| (e.base.h0, &e.base.phi));
        for (h0, phi) in cached.map(|(b, phi)| (f64::from_bits(*b), phi)).chain(near) {
            let d = len - h0;
            if d.abs() <= reach && best.is_none_or(|(bd, _)| d.abs() < bd.abs()) {
                best = Some((d, phi));
            }
        }
        best
    }
}

/// Lengths a polynomial about a nearby length must serve, on average,
/// before another is made (see `ModeCache::advance_polynomial`): one
/// exponential of a few states costs about as much as a hundred short
/// Taylor remainders.
const PAYBACK: u64 = 64;

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
    /// Scratch of event location: the terms of a nearby length's
    /// polynomial at the start state (`near_crossing`).
    pub(super) near: Vec<f64>,
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Lengths that wander wider than a polynomial's reach, each within
    /// half a reach of the one before, are all advanced as the exact
    /// exponential of their length does (to 1e-12 of the state; the
    /// series of e^{Mδ}, common practice), while a polynomial is made
    /// only for the first and then where the ones made have paid for
    /// themselves: at most two made over a walk of 400 lengths whose
    /// polynomials serve two lengths each, where one wherever none served
    /// would have been over a hundred (four with the first four free).
    #[test]
    fn wandering_lengths_make_few_polynomials() {
        let c = crate::test_util::light_buck(0.0);
        // Switch off, diode on: the discontinuous buck's freewheeling.
        let (_, mode) = crate::mode::testing::built(&c, 0, 1);
        let n = mode.m.nrows();
        let reach = NEAR_REACH / propagate::norm1(&mode.m);
        let mut cache = ModeCache::default();
        let mut stats = Stats::default();
        let mut buf = Buffers {
            z_try: DVector::zeros(n),
            advance: propagate::Scratch::default(),
            terms: propagate::TaylorTerms::default(),
            za: DVector::zeros(n),
            coef: vec![],
            near: vec![],
        };
        let z: Vec<f64> = (0..n).map(|i| 0.3 + 0.2 * i as f64).collect();
        let mut h = 2.0e-6;
        for k in 0..400 {
            h += 0.4 * reach;
            let mut out = vec![0.0; n];
            cache.advance_uncached(
                &mode,
                Span {
                    h,
                    cacheable: false,
                    stiff: false,
                },
                Shortcuts::ALL,
                Io {
                    z: &z,
                    z_next: &mut out,
                    stats: &mut stats,
                    buf: &mut buf,
                },
            );
            let mut want = vec![0.0; n];
            propagate::matvec(&propagate::expm(&mode.m, h), &z, &mut want);
            let scale = want.iter().fold(0.0f64, |m, v| m.max(v.abs()));
            for (a, b) in out.iter().zip(&want) {
                assert!((a - b).abs() <= 1e-12 * scale, "length {k}: {a} vs {b}");
            }
        }
        assert!(cache.near_made <= 2, "{} polynomials made", cache.near_made);
        assert!(
            cache.near_served >= 1,
            "{} lengths served",
            cache.near_served
        );
    }
}
