//! The mode set: every conduction pattern met so far, its compiled mode
//! (numbered in the order first met) and what is cached for it. The
//! stages read modes by number (`self.modes[mi]`); only
//! `Simulator::mode_id` adds one.

use std::collections::HashMap;
use std::ops::Index;
use std::sync::Arc;

use nalgebra::DMatrix;

use super::locate;
use crate::mode::{Mode, ModeKey};
use crate::near::NearAnchor;
use crate::propagate;

/// The modes met so far and their caches, by number.
#[derive(Default)]
pub(super) struct ModeSet {
    /// The modes by number. Stages that need a mode while changing the
    /// rest of the simulator borrow this list out with `std::mem::take`
    /// and put it back (cloning an `Arc` costs two atomic operations per
    /// interval).
    pub(super) list: Vec<Arc<Mode>>,
    /// What is cached per mode, by the bits of interval lengths.
    pub(super) caches: Vec<ModeCache>,
    /// Keys of `list` in order; a linear scan beats hashing for the few
    /// modes a converter visits.
    keys: Vec<ModeKey>,
    /// The number of each key, for sets past [`LINEAR_SCAN`] modes.
    index: HashMap<ModeKey, u32>,
}

/// Up to this many modes a key is looked up by a linear scan.
const LINEAR_SCAN: usize = 32;

impl ModeSet {
    /// The number of the mode of conduction pattern `key`, if met.
    #[inline]
    pub(super) fn find(&self, key: ModeKey) -> Option<u32> {
        if self.keys.len() <= LINEAR_SCAN {
            self.keys.iter().position(|k| *k == key).map(|i| i as u32)
        } else {
            self.index.get(&key).copied()
        }
    }

    /// Adds the mode `m` of pattern `key` with an empty cache; its number.
    pub(super) fn insert(&mut self, key: ModeKey, m: Arc<Mode>) -> u32 {
        let i = self.list.len() as u32;
        self.list.push(m);
        self.caches.push(ModeCache::default());
        self.index.insert(key, i);
        self.keys.push(key);
        i
    }

    /// Mode `i` and its cache, the one to read while writing the other.
    #[inline(always)]
    pub(super) fn entry(&mut self, i: usize) -> (&Mode, &mut ModeCache) {
        (&self.list[i], &mut self.caches[i])
    }

    /// How many modes have been met.
    pub(super) fn len(&self) -> usize {
        self.list.len()
    }
}

impl Index<usize> for ModeSet {
    type Output = Arc<Mode>;

    #[inline(always)]
    fn index(&self, i: usize) -> &Arc<Mode> {
        &self.list[i]
    }
}

/// A cached discretisation: the bits of a length h and e^{Mh}.
pub(super) type Disc = (u64, DMatrix<f64>);

/// What is cached for one mode, by the exact bits of interval lengths.
pub(super) struct ModeCache {
    /// e^{Mh} for spans of the schedule, at most 16.
    pub(super) scheduled: Vec<Disc>,
    /// The mode a remembered transition entered from this one last
    /// ([`NO_SUCCESSOR`] before any): its data is fetched into the cache
    /// ahead of its use (`ModeSet::prefetch_successor`).
    pub(super) successor: u32,
    /// The latest lengths advanced without a cached exponential (a ring).
    pub(super) misses: [u64; REPEAT_RING],
    /// e^{Mh} for lengths that came back, at most [`MAX_AGAIN`], and the
    /// next one to replace once full (see `Simulator::advance_repeated`).
    pub(super) repeated: Vec<Disc>,
    pub(super) repeated_next: usize,
    /// Polynomials about lengths that keep coming back nearly (see
    /// `ModeCache::advance_polynomial`), at most [`MAX_NEAR`], and the
    /// next one to replace once full.
    pub(super) near: Vec<NearAnchor>,
    pub(super) near_next: usize,
    /// Lengths the polynomials above served, and how many were made: a
    /// new one is made only while they pay for themselves.
    pub(super) near_served: u64,
    pub(super) near_made: u64,
    /// Guard polynomials of scheduled lengths (see `locate.rs`), and the
    /// index of those searched last.
    pub(super) polys: Vec<locate::GuardPolys>,
    pub(super) last_polys: usize,
    /// The mode's eigenvalues, computed at its first stiff span (`None`
    /// before; `Some(None)` where they cannot be trusted).
    pub(super) spectrum: Option<Option<std::sync::Arc<propagate::Spectrum>>>,
    /// The mode's energy envelope (`crate::envelope`), computed at its
    /// first stiff span that is searched (`Some(None)` where none applies).
    pub(super) envelope: Option<Option<std::sync::Arc<crate::envelope::Envelope>>>,
    /// e^{Mδ} for the sub-interval lengths δ of stiff spans.
    pub(super) stiff_steps: Vec<Disc>,
    /// e^{Mδ·2ⁱ} for δ the Taylor step of the mode's rate, i = 0, 1, …:
    /// exact states anywhere in a stiff span (`locate::Ladder`), built
    /// when event location first searches one.
    pub(super) ladder: Vec<DMatrix<f64>>,
}

impl ModeCache {
    /// The cached e^{Mh} of a span of the schedule whose length has the
    /// bits `bits`.
    #[inline(always)]
    pub(super) fn find_scheduled(&self, bits: u64) -> Option<&DMatrix<f64>> {
        self.scheduled
            .iter()
            .find(|(b, _)| *b == bits)
            .map(|(_, phi)| phi)
    }

    /// The cached e^{Mh} of a length with the bits `bits` that came back.
    #[inline(always)]
    pub(super) fn find_repeated(&self, bits: u64) -> Option<&DMatrix<f64>> {
        self.repeated
            .iter()
            .find(|(b, _)| *b == bits)
            .map(|(_, phi)| phi)
    }
}

impl Default for ModeCache {
    fn default() -> Self {
        ModeCache {
            scheduled: vec![],
            successor: NO_SUCCESSOR,
            misses: [f64::NAN.to_bits(); REPEAT_RING],
            repeated: vec![],
            repeated_next: 0,
            near: vec![],
            near_next: 0,
            near_served: 0,
            near_made: 0,
            polys: vec![],
            last_polys: 0,
            spectrum: None,
            envelope: None,
            stiff_steps: vec![],
            ladder: vec![],
        }
    }
}

/// [`ModeCache::successor`] before any transition.
pub(super) const NO_SUCCESSOR: u32 = u32::MAX;

/// Fewest entries of z for which the lane fetches the next mode's data
/// ahead ([`ModeSet::prefetch_successor`]): below, a mode's exponential
/// and guard lines are a few cache lines and stay in the first-level
/// cache anyway.
pub(super) const PREFETCH_FROM: usize = 9;

impl ModeSet {
    /// Asks the processor to bring into its first-level cache what the
    /// mode after mode `mi` will read first: its guard lines (the
    /// replay's checks at the coming edge) and the head of its first
    /// cached exponential (the product of the interval after it; see
    /// [`PREFETCH_HEAD`]). Only a hint:
    /// nothing is read or changed, so results are the same bits. A
    /// converter of many phases visits more modes a period than that
    /// cache holds (the twelve-phase buck: 12 modes, each with a 17×17
    /// exponential), and each edge otherwise waits for them.
    #[inline(always)]
    pub(super) fn prefetch_successor(&self, mi: usize) {
        let next = self.caches[mi].successor;
        if next == NO_SUCCESSOR {
            return;
        }
        let next = next as usize;
        let lines = &self.list[next].guard_lines;
        prefetch_bytes(
            lines.as_ptr().cast(),
            std::mem::size_of_val(lines.as_slice()),
        );
        if let Some((_, phi)) = self.caches[next].scheduled.first() {
            let data = phi.as_slice();
            prefetch_bytes(
                data.as_ptr().cast(),
                std::mem::size_of_val(data).min(PREFETCH_HEAD),
            );
        }
    }
}

/// Bytes of the next exponential fetched ahead: its first two lines; the
/// processor's own prefetcher follows the rest of the product's
/// sequential read. Every line (37 at twelve phases) cost the
/// twelve-phase event 115 instructions and 4–10 % of wall time in the
/// phases bench, over three code layouts.
const PREFETCH_HEAD: usize = 128;

/// A prefetch hint for every cache line of `len` bytes from `p`.
#[inline(always)]
fn prefetch_bytes(p: *const u8, len: usize) {
    #[cfg(target_arch = "x86_64")]
    {
        use std::arch::x86_64::{_mm_prefetch, _MM_HINT_T0};
        let mut off = 0;
        while off < len {
            // SAFETY: a prefetch is a hint that never faults and reads
            // nothing into the program; `p + off` lies inside the slice.
            unsafe { _mm_prefetch::<_MM_HINT_T0>(p.add(off).cast()) };
            off += 64;
        }
    }
    #[cfg(not(target_arch = "x86_64"))]
    let _ = (p, len);
}

/// Lengths remembered per mode for caching on their return (see `step`).
pub(super) const REPEAT_RING: usize = 8;

/// Most exponentials cached per mode for lengths that came back.
pub(super) const MAX_AGAIN: usize = 16;

/// Most polynomials about nearby lengths kept per mode.
pub(super) const MAX_NEAR: usize = 4;

#[cfg(test)]
mod tests {
    use super::*;
    use crate::compile::Compiled;

    /// Modes are numbered in the order first met, and found again by
    /// that number whether the set is small (linear scan) or large (hash
    /// map); each has a cache of its own.
    #[test]
    fn modes_are_numbered_as_first_met() {
        let c = fluxstep_netlist::Circuit::builder()
            .voltage_source("V1", "a", "gnd", 1.0)
            .resistor("R1", "a", "gnd", 1.0)
            .build()
            .expect("valid");
        let cc = Compiled::compile(&c).expect("compiles");
        let key = |i: u64| ModeKey {
            switches: i,
            diodes: i.wrapping_mul(0x9e37_79b9) >> 7,
            ramps: 0,
        };
        let m = Arc::new(Mode::build(&cc, key(0)).expect("builds"));
        let mut set = ModeSet::default();
        for i in 0..100u64 {
            assert_eq!(set.find(key(i)), None, "{i} not met yet");
            assert_eq!(set.insert(key(i), m.clone()), i as u32);
            // Every mode met so far, in both regimes of the look-up.
            for j in [0, i / 2, i] {
                assert_eq!(set.find(key(j)), Some(j as u32), "{j} of {i}");
            }
        }
        assert_eq!(set.len(), 100);
        assert_eq!(set.caches.len(), 100);
        let (_, cache) = set.entry(42);
        cache.scheduled.push((7, DMatrix::zeros(1, 1)));
        assert!(set.caches[42].find_scheduled(7).is_some());
        assert!(set.caches[41].find_scheduled(7).is_none());
    }
}
