//! Step 1 of a mode: which branches conduct, the groups of nodes that float
//! (inductor cutsets and free groups), the loops of zero-resistance voltage
//! branches (capacitor loops and shorts) and shoot-through through
//! resistive devices. Integer work only: no floating-point operation.

use fluxstep_netlist::graph::UnionFind;

use crate::compile::{BranchKind, Compiled};

use super::{ramp_bit, ModeKey, ModeProblem};

/// Path of branch indices between nodes `a` and `b` in a forest given as
/// edges (node, node, branch).
fn forest_path(edges: &[(usize, usize, usize)], a: usize, b: usize, n_nodes: usize) -> Vec<usize> {
    let mut prev: Vec<Option<(usize, usize)>> = vec![None; n_nodes];
    let mut seen = vec![false; n_nodes];
    let mut queue = std::collections::VecDeque::from([a]);
    seen[a] = true;
    while let Some(n) = queue.pop_front() {
        if n == b {
            break;
        }
        for &(x, y, br) in edges {
            let other = if x == n {
                y
            } else if y == n {
                x
            } else {
                continue;
            };
            if !seen[other] {
                seen[other] = true;
                prev[other] = Some((n, br));
                queue.push_back(other);
            }
        }
    }
    let mut path = vec![];
    let mut cur = b;
    while let Some((p, br)) = prev[cur] {
        path.push(br);
        cur = p;
    }
    path
}

/// How each switch and diode of a pattern conducts.
#[derive(Clone, Copy)]
pub(super) struct Conduction(pub ModeKey);

impl Conduction {
    /// Switch `i` is a voltage ramp (a source of its transition input).
    pub(super) fn ramp_v(self, i: usize) -> bool {
        self.0.ramps & ramp_bit(i, true) != 0
    }

    /// Switch `i` is a current ramp.
    pub(super) fn ramp_i(self, i: usize) -> bool {
        self.0.ramps & ramp_bit(i, false) != 0
    }

    /// Switch `i` is closed (a short or its on-resistance): on and in no
    /// ramp.
    pub(super) fn sw_on(self, i: usize) -> bool {
        self.0.switches >> i & 1 == 1 && self.0.ramps >> (2 * i) & 3 == 0
    }

    /// Diode `i` conducts.
    pub(super) fn d_on(self, i: usize) -> bool {
        self.0.diodes >> i & 1 == 1
    }

    /// The branch is present as a resistive or voltage branch (holds its
    /// two nodes together).
    fn present_voltage(self, k: &BranchKind) -> bool {
        match k {
            BranchKind::Resistor { .. }
            | BranchKind::VSource { .. }
            | BranchKind::Capacitor { .. } => true,
            BranchKind::Transformer { .. } => true,
            BranchKind::Switch { sw } => self.sw_on(*sw) || self.ramp_v(*sw),
            BranchKind::Diode { d } => self.d_on(*d),
            BranchKind::Winding { .. } | BranchKind::ISource { .. } => false,
        }
    }

    /// The pass in which a zero-resistance voltage branch joins the loop
    /// forest (sources, then shorts, then capacitors last, so that a loop
    /// is closed by a capacitor wherever one takes part); `None` for a
    /// branch with resistance or no voltage.
    fn zero_r(self, cc: &Compiled, k: &BranchKind) -> Option<u8> {
        match k {
            BranchKind::VSource { .. } => Some(0),
            BranchKind::Switch { sw } if self.ramp_v(*sw) => Some(0),
            BranchKind::Switch { sw } if self.sw_on(*sw) && cc.switches[*sw].r_on == 0.0 => Some(1),
            BranchKind::Diode { d } if self.d_on(*d) && cc.diodes[*d].r_on == 0.0 => Some(1),
            BranchKind::Capacitor { .. } => Some(2),
            _ => None,
        }
    }
}

/// A group of nodes with no resistive or voltage path to ground.
#[derive(Clone, Debug, Default)]
pub(super) struct FloatingGroup {
    /// Winding branches that reach the group (non-empty: an inductor
    /// cutset, fixed by a multiplier; empty: a free group).
    pub windings: Vec<usize>,
    /// Names of current sources (and current ramps) that reach the group.
    pub sources: Vec<String>,
}

/// A capacitor that closes a loop of capacitors and voltage sources.
#[derive(Clone, Debug)]
pub(super) struct CapacitorLoop {
    /// The closing capacitor's branch.
    pub cap: usize,
    /// The other capacitors of the loop (branches).
    pub others: Vec<usize>,
}

/// Loops of zero-resistance voltage branches.
struct Loops {
    loops: Vec<CapacitorLoop>,
    /// The first loop that is a short or an undetermined current split.
    problem: Option<ModeProblem>,
}

/// The structure of a pattern that the network solve and the constraints
/// work on.
pub(super) struct Topology {
    /// Index into `floating` of each node's group (`usize::MAX`: the node
    /// is held to ground).
    pub floating_of: Vec<usize>,
    /// The floating groups.
    pub floating: Vec<FloatingGroup>,
    /// Floating groups reached by windings (cutsets), in group order.
    pub cut: Vec<usize>,
    /// Floating groups reached by no winding (free gauges), in group order.
    pub free: Vec<usize>,
    /// Capacitors closing loops, each replaced by a multiplier.
    pub loops: Vec<CapacitorLoop>,
    /// A short (the first found) that makes the pattern impossible.
    pub problem: Option<ModeProblem>,
    /// Shoot-through through resistive devices, see [`super::Mode`].
    pub resistive_short: Option<(Vec<String>, Vec<String>)>,
}

impl Topology {
    /// Finds the groups, loops and shorts of pattern `on`.
    pub(super) fn find(cc: &Compiled, on: Conduction) -> Topology {
        let (floating_of, floating) = floating_groups(cc, on);
        let Loops { loops, problem } = zero_resistance_loops(cc, on);
        let resistive_short = if problem.is_none() {
            resistive_short(cc, on)
        } else {
            None
        };
        let cut = (0..floating.len())
            .filter(|&c| !floating[c].windings.is_empty())
            .collect();
        let free = (0..floating.len())
            .filter(|&c| floating[c].windings.is_empty())
            .collect();
        Topology {
            floating_of,
            floating,
            cut,
            free,
            loops,
            problem,
            resistive_short,
        }
    }

    /// The lowest-numbered node of floating group `c`.
    pub(super) fn rep(&self, c: usize) -> usize {
        (1..self.floating_of.len())
            .find(|&n| self.floating_of[n] == c)
            .expect("a group has a node")
    }

    /// The loop that capacitor branch `bi` closes, if any.
    pub(super) fn loop_of(&self, bi: usize) -> Option<usize> {
        self.loops.iter().position(|l| l.cap == bi)
    }
}

/// Groups of nodes held together by resistive or voltage branches, other
/// than ground's: each node's group and each group's windings and current
/// sources.
fn floating_groups(cc: &Compiled, on: Conduction) -> (Vec<usize>, Vec<FloatingGroup>) {
    let nn = cc.nodes.len();
    let mut dsu = UnionFind::new(nn);
    for b in &cc.branches {
        if on.present_voltage(&b.kind) {
            dsu.union(b.a, b.b);
            if let BranchKind::Transformer { sec, .. } = b.kind {
                dsu.union(sec.0, sec.1);
            }
        }
    }
    let ground_root = dsu.find(0);
    let mut roots: Vec<usize> = vec![]; // root of each floating group
    let mut floating_of = vec![usize::MAX; nn];
    #[allow(clippy::needless_range_loop)] // n is a node number, not just an index
    for n in 1..nn {
        let r = dsu.find(n);
        if r != ground_root {
            let ci = match roots.iter().position(|&x| x == r) {
                Some(i) => i,
                None => {
                    roots.push(r);
                    roots.len() - 1
                }
            };
            floating_of[n] = ci;
        }
    }
    // Classify floating groups: reached by a winding → cutset multiplier.
    let mut groups = vec![FloatingGroup::default(); roots.len()];
    for (bi, b) in cc.branches.iter().enumerate() {
        let ca = floating_of[b.a];
        let cb = floating_of[b.b];
        if ca == cb {
            continue;
        }
        for c in [ca, cb] {
            if c == usize::MAX {
                continue;
            }
            match b.kind {
                BranchKind::Winding { .. } => groups[c].windings.push(bi),
                BranchKind::ISource { .. } => groups[c].sources.push(b.name.clone()),
                BranchKind::Switch { sw } if on.ramp_i(sw) => {
                    groups[c].sources.push(b.name.clone())
                }
                _ => {}
            }
        }
    }
    (floating_of, groups)
}

/// Loops of zero-resistance voltage branches; capacitors last. A loop
/// closed by a capacitor with another capacitor or a source in it is a
/// capacitor loop; any other loop is a short or an undetermined split.
fn zero_resistance_loops(cc: &Compiled, on: Conduction) -> Loops {
    let nn = cc.nodes.len();
    let mut dsu = UnionFind::new(nn);
    let mut forest: Vec<(usize, usize, usize)> = vec![];
    let mut loops = vec![];
    let mut problem = None;
    for pass in 0..3u8 {
        for (bi, b) in cc.branches.iter().enumerate() {
            if on.zero_r(cc, &b.kind) != Some(pass) {
                continue;
            }
            if dsu.union(b.a, b.b) {
                forest.push((b.a, b.b, bi));
                continue;
            }
            let path = forest_path(&forest, b.a, b.b, nn);
            let caps: Vec<usize> = path
                .iter()
                .copied()
                .filter(|&p| matches!(cc.branches[p].kind, BranchKind::Capacitor { .. }))
                .collect();
            let has_source = path
                .iter()
                .any(|&p| matches!(cc.branches[p].kind, BranchKind::VSource { .. }))
                || matches!(b.kind, BranchKind::VSource { .. });
            let is_cap = matches!(b.kind, BranchKind::Capacitor { .. });
            if is_cap && (!caps.is_empty() || has_source) {
                loops.push(CapacitorLoop {
                    cap: bi,
                    others: caps,
                });
            } else if problem.is_none() {
                let mut all = path.clone();
                all.push(bi);
                problem = Some(short_problem(cc, &all));
            }
        }
    }
    Loops { loops, problem }
}

/// The problem of a loop of zero-resistance branches `all` that is no
/// capacitor loop: a short of the sources and capacitors in it, or, with
/// none, switches and diodes whose current split is undetermined.
fn short_problem(cc: &Compiled, all: &[usize]) -> ModeProblem {
    let switches: Vec<String> = all
        .iter()
        .filter(|&&p| {
            matches!(
                cc.branches[p].kind,
                BranchKind::Switch { .. } | BranchKind::Diode { .. }
            )
        })
        .map(|&p| cc.branches[p].name.clone())
        .collect();
    let shorted: Vec<String> = all
        .iter()
        .filter(|&&p| {
            matches!(
                cc.branches[p].kind,
                BranchKind::VSource { .. } | BranchKind::Capacitor { .. }
            )
        })
        .map(|&p| cc.branches[p].name.clone())
        .collect();
    if shorted.is_empty() {
        ModeProblem::Unsupported(format!(
            "{} conduct in parallel with zero resistance, so their current split is undetermined; give one an on-resistance",
            switches.join(", ")
        ))
    } else {
        ModeProblem::Short { switches, shorted }
    }
}

/// Shoot-through through resistive devices: closed switches and
/// conducting diodes (any resistance) joining both terminals of a voltage
/// source, or of a capacitor through two or more devices (one device
/// across a capacitor is that device's own capacitance or snubber being
/// discharged, not a shorted leg). (devices, shorted element).
fn resistive_short(cc: &Compiled, on: Conduction) -> Option<(Vec<String>, Vec<String>)> {
    let nn = cc.nodes.len();
    let mut dsu = UnionFind::new(nn);
    let mut devices: Vec<(usize, usize, usize)> = vec![];
    for (bi, b) in cc.branches.iter().enumerate() {
        let conducts = match &b.kind {
            BranchKind::Switch { sw } => on.sw_on(*sw),
            BranchKind::Diode { d } => on.d_on(*d),
            _ => false,
        };
        if conducts && dsu.union(b.a, b.b) {
            devices.push((b.a, b.b, bi));
        }
    }
    for b in &cc.branches {
        let min_devices = match b.kind {
            BranchKind::VSource { .. } => 1,
            BranchKind::Capacitor { .. } => 2,
            _ => continue,
        };
        if b.a != b.b && dsu.find(b.a) == dsu.find(b.b) {
            let path = forest_path(&devices, b.a, b.b, nn);
            if path.len() >= min_devices {
                let names = path.iter().map(|&p| cc.branches[p].name.clone()).collect();
                return Some((names, vec![b.name.clone()]));
            }
        }
    }
    None
}

#[cfg(test)]
mod tests {
    use fluxstep_netlist::{Circuit, DiodeModel};

    use super::{forest_path, UnionFind};
    use crate::mode::testing::{buck, built};
    use crate::mode::ModeProblem;

    #[test]
    fn union_find_and_forest_paths() {
        let mut dsu = UnionFind::new(5);
        assert!(dsu.union(3, 4));
        assert!(dsu.union(4, 1));
        assert!(!dsu.union(3, 1));
        assert_eq!(dsu.find(3), 1);
        assert_ne!(dsu.find(0), dsu.find(4));
        // Edges (node, node, branch): 0–1 by 10, 1–2 by 11, 1–3 by 12.
        let edges = [(0, 1, 10), (1, 2, 11), (1, 3, 12)];
        assert_eq!(forest_path(&edges, 2, 3, 4), vec![12, 11]);
        assert_eq!(forest_path(&edges, 0, 0, 4), Vec::<usize>::new());
    }

    /// Both buck switches closed across the source (the ideal switch and
    /// the conducting ideal diode): a zero-resistance short, named.
    #[test]
    fn shoot_through_of_ideal_parts_is_a_named_short() {
        let (_, mode) = built(&buck(), 1, 1);
        match mode.problem {
            Some(ModeProblem::Short { switches, shorted }) => {
                assert_eq!(switches, vec!["S1".to_string(), "D1".to_string()]);
                assert_eq!(shorted, vec!["Vin".to_string()]);
            }
            other => panic!("expected a short, got {other:?}"),
        }
    }

    /// Two ideal switches in parallel: their current split is undetermined.
    #[test]
    fn parallel_ideal_switches_are_unsupported() {
        let c = Circuit::builder()
            .voltage_source("Vin", "in", "gnd", 5.0)
            .resistor("R", "in", "a", 1.0)
            .switch("S1", "a", "gnd", "drive")
            .switch("S2", "a", "gnd", "drive")
            .pwm("drive", 100e3, 0.5)
            .build()
            .expect("valid");
        let (_, mode) = built(&c, 0b11, 0);
        assert!(
            matches!(&mode.problem, Some(ModeProblem::Unsupported(m)) if m.starts_with("S1, S2 conduct in parallel")),
            "{:?}",
            mode.problem
        );
        let (_, one) = built(&c, 0b01, 0);
        assert!(one.problem.is_none());
    }

    /// A half bridge of transistors with on-resistance, both on: a
    /// resistive short of the source, not a problem of the pattern.
    #[test]
    fn resistive_shoot_through_is_reported_apart() {
        let body = DiodeModel::default();
        let c = Circuit::builder()
            .voltage_source("Vin", "in", "gnd", 24.0)
            .transistor("Q1", "in", "sw", "hb.high", 0.01, body.clone())
            .transistor("Q2", "sw", "gnd", "hb.low", 0.01, body)
            .inductor("L1", "sw", "out", 22e-6)
            .resistor("R", "out", "gnd", 6.0)
            .complementary_pwm("hb", 200e3, 0.5, 50e-9, 80e-9)
            .build()
            .expect("valid");
        let (_, mode) = built(&c, 0b11, 0);
        assert!(mode.problem.is_none());
        let (devices, shorted) = mode.resistive_short.expect("a resistive short");
        assert_eq!(shorted, vec!["Vin".to_string()]);
        assert_eq!(devices.len(), 2);
        let (_, one) = built(&c, 0b01, 0);
        assert!(one.resistive_short.is_none());
    }
}
