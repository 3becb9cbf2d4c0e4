//! Topology: the element graph and the rules on it.
//!
//! The element graph has the nodes as vertices and, as edges, every pair of
//! terminals that an element joins electrically: the two terminals of a
//! two-terminal element, each winding of a set of coupled inductors, and
//! the primary and the secondary of an ideal transformer **separately**.
//! Magnetic coupling carries no direct current and fixes no potential
//! between windings, so a winding's side of the circuit with no galvanic
//! path to ground has undetermined node voltages (its nodal equations are
//! singular). Each side of a transformer or of coupled inductors therefore
//! needs its own path to ground. To model an isolated secondary, tie its
//! return to `gnd` directly (the usual choice in simulation: with a single
//! return point no current flows through the tie) or through a large
//! resistor.
//!
//! On that graph:
//!
//! - a node reached by only one terminal is dangling;
//! - every connected component must contain ground;
//! - voltage sources alone must not close a loop (union-find over the
//!   voltage-source edges in element order: the source that closes a cycle
//!   is named, with the sources already joining its nodes);
//! - current sources alone must not form a cut: in the graph without the
//!   current-source edges, a component without ground that current sources
//!   join to ground is a set of nodes whose voltages no element fixes.
//!
//! Loops of capacitors and voltage sources, and cuts of inductors and
//! current sources, are allowed: the solver reduces them (see DESIGN.md).

use std::collections::{HashMap, HashSet, VecDeque};

use super::checker::{quoted, Checker};
use crate::circuit::{is_ground, Circuit, GROUND};
use crate::element::*;
use crate::error::Problem;
use crate::graph::UnionFind;

impl Checker<'_> {
    /// The rules on the element graph, in order (see the module's
    /// documentation).
    pub(super) fn topology(&mut self) {
        if self.circuit.elements.is_empty() {
            self.out.push(Problem {
                element: None,
                field: Some("elements".into()),
                node: None,
                message: "the circuit has no elements".into(),
            });
            return;
        }
        let graph = Graph::of(self.circuit, &self.labels);
        self.shorted_elements(&graph);
        self.dangling_nodes(&graph);
        self.voltage_source_loops(&graph);
        let Some(ground) = graph.ground else {
            self.out.push(Problem::circuit(
                "no element touches ground: connect the reference node 'gnd' (or its alias '0')",
            ));
            // Without ground every part is "floating"; saying so again for
            // each part would bury the one problem that matters.
            return;
        };
        let mut all = self.floating_parts(&graph, ground);
        self.current_source_cuts(&graph, ground, &mut all);
    }

    /// An element whose terminals are one node.
    fn shorted_elements(&mut self, graph: &Graph) {
        let names = &graph.names;
        for b in &graph.branches {
            if b.a == b.b {
                let p = Problem::field(
                    &self.labels[b.element],
                    &b.field,
                    format!("both terminals are node '{}'", names[b.a]),
                )
                .at_node(names[b.a]);
                self.out.push(p);
            }
        }
    }

    /// A node reached by one terminal only.
    fn dangling_nodes(&mut self, graph: &Graph) {
        let names = &graph.names;
        let mut count = vec![0usize; names.len()];
        for t in &graph.terminals {
            count[t.2] += 1;
        }
        for (i, field, nd) in &graph.terminals {
            if count[*nd] == 1 {
                let p = Problem::field(
                    &self.labels[*i],
                    field,
                    format!(
                        "node '{}' is reached by only this terminal (a dangling node: connect it or remove it)",
                        names[*nd]
                    ),
                )
                .at_node(names[*nd]);
                self.out.push(p);
            }
        }
    }

    /// Parts with no connection to ground, one problem each; returns the
    /// connected parts of the whole graph.
    fn floating_parts(&mut self, graph: &Graph, ground: usize) -> UnionFind {
        let (names, branches) = (&graph.names, &graph.branches);
        let n = names.len();
        let mut all = UnionFind::new(n);
        for b in branches {
            all.union(b.a, b.b);
        }
        let root_g = all.find(ground);
        let mut reported: HashSet<usize> = HashSet::new();
        for v in 0..n {
            let r = all.find(v);
            if r == root_g || !reported.insert(r) {
                continue;
            }
            let nodes: Vec<&str> = (0..n)
                .filter(|&u| all.find(u) == r)
                .map(|u| names[u])
                .collect();
            let part: Vec<&Branch> = branches.iter().filter(|b| all.find(b.a) == r).collect();
            let parts: Vec<&str> = part.iter().map(|b| b.part.as_str()).collect();
            let first = part
                .first()
                .expect("every node is a terminal of some branch");
            let mut message = format!(
                "part of the circuit with node(s) {} has no connection to ground (it holds {})",
                quoted(&nodes),
                parts.join(", ")
            );
            if part.iter().any(|b| b.magnetic) {
                message.push_str(
                    "; a transformer or coupled winding does not connect its windings \
                     electrically, so give each side its own path to ground",
                );
            }
            let p = Problem::field(&self.labels[first.element], &first.field, message)
                .at_node(nodes[0]);
            self.out.push(p);
        }
        all
    }

    /// A voltage source that closes a loop of voltage sources, named with
    /// the sources already in the loop.
    fn voltage_source_loops(&mut self, graph: &Graph) {
        let names = &graph.names;
        let n = names.len();
        let mut sets = UnionFind::new(n);
        // The forest of accepted sources, to name the loop a source closes.
        let mut adjacent: Vec<Vec<(usize, usize)>> = vec![Vec::new(); n];
        for b in &graph.branches {
            let is_vs = matches!(self.circuit.elements[b.element], Element::VoltageSource(_));
            if !is_vs || b.a == b.b {
                continue;
            }
            if sets.union(b.a, b.b) {
                adjacent[b.a].push((b.b, b.element));
                adjacent[b.b].push((b.a, b.element));
                continue;
            }
            let others: Vec<&str> = forest_path(&adjacent, b.a, b.b)
                .into_iter()
                .map(|e| self.labels[e].as_str())
                .collect();
            let p = Problem::field(
                &self.labels[b.element],
                &b.field,
                format!(
                    "voltage source between nodes '{}' and '{}' closes a loop made only of voltage sources (with {})",
                    names[b.a],
                    names[b.b],
                    others.join(", ")
                ),
            )
            .at_node(names[b.a]);
            self.out.push(p);
        }
    }

    /// Nodes joined to ground only through current sources; `all` holds
    /// the connected parts of the whole graph.
    fn current_source_cuts(&mut self, graph: &Graph, ground: usize, all: &mut UnionFind) {
        let (names, branches) = (&graph.names, &graph.branches);
        let n = names.len();
        let circuit = self.circuit;
        let is_cs = |b: &Branch| matches!(circuit.elements[b.element], Element::CurrentSource(_));
        let mut rest = UnionFind::new(n);
        for b in branches.iter().filter(|b| !is_cs(b)) {
            rest.union(b.a, b.b);
        }
        let root_g = rest.find(ground);
        let root_all = all.find(ground);
        let mut reported: HashSet<usize> = HashSet::new();
        for v in 0..n {
            let r = rest.find(v);
            // Parts that are not joined to ground at all were reported as
            // floating above.
            if r == root_g || all.find(v) != root_all || !reported.insert(r) {
                continue;
            }
            let nodes: Vec<&str> = (0..n)
                .filter(|&u| rest.find(u) == r)
                .map(|u| names[u])
                .collect();
            // The sources that cross the cut: one terminal inside, one outside.
            let sources: Vec<usize> = branches
                .iter()
                .filter(|b| is_cs(b) && ((rest.find(b.a) == r) != (rest.find(b.b) == r)))
                .map(|b| b.element)
                .collect();
            let source_names: Vec<&str> =
                sources.iter().map(|&e| self.labels[e].as_str()).collect();
            let p = Problem::field(
                &self.labels[*sources.first().expect(
                    "a part joined to ground only through current sources is crossed by one",
                )],
                "nodes",
                format!(
                    "node(s) {} connect to the rest of the circuit only through current source(s) {} \
                     (a cut made only of current sources leaves their voltages undetermined)",
                    quoted(&nodes),
                    source_names.join(", ")
                ),
            )
            .at_node(nodes[0]);
            self.out.push(p);
        }
    }
}

/// The element graph: nodes numbered in order of first use (ground under
/// its canonical name), every terminal and every branch.
struct Graph<'c> {
    /// Node names by number.
    names: Vec<&'c str>,
    /// The number of ground, if an element touches it.
    ground: Option<usize>,
    /// Every terminal as (element, field, node).
    terminals: Vec<(usize, String, usize)>,
    /// Every pair of terminals an element joins electrically.
    branches: Vec<Branch>,
}

impl<'c> Graph<'c> {
    /// The graph of `circuit`, its branches named after `labels`.
    fn of(circuit: &'c Circuit, labels: &[String]) -> Self {
        let mut index = NodeIndex::default();
        let mut terminals: Vec<(usize, String, usize)> = Vec::new();
        let mut branches: Vec<Branch> = Vec::new();
        for (i, e) in circuit.elements.iter().enumerate() {
            for (field, n) in e.terminals() {
                terminals.push((i, field, index.get(n)));
            }
            for (field, part, pair, magnetic) in pairs(e, &labels[i]) {
                branches.push(Branch {
                    element: i,
                    field,
                    part,
                    a: index.get(&pair[0]),
                    b: index.get(&pair[1]),
                    magnetic,
                });
            }
        }
        Graph {
            ground: index.index.get(GROUND).copied(),
            names: index.names,
            terminals,
            branches,
        }
    }
}

/// An electrical connection made by an element between two nodes.
struct Branch {
    element: usize,
    /// The field that holds the two terminals: `nodes`, `primary`,
    /// `secondary` or `windings[i].nodes`.
    field: String,
    /// What messages call this branch: the element, or `X1.primary`.
    part: String,
    a: usize,
    b: usize,
    /// A transformer side or a coupled winding: magnetically linked to
    /// other branches but not galvanically.
    magnetic: bool,
}

/// Node names numbered in order of first use, ground under its canonical name.
#[derive(Default)]
struct NodeIndex<'c> {
    index: HashMap<&'c str, usize>,
    names: Vec<&'c str>,
}

impl<'c> NodeIndex<'c> {
    /// The number of `node`, numbering it if it is new.
    fn get(&mut self, node: &'c str) -> usize {
        let node = canonical(node);
        if let Some(&i) = self.index.get(node) {
            return i;
        }
        self.names.push(node);
        self.index.insert(node, self.names.len() - 1);
        self.names.len() - 1
    }
}

/// The node name every other check uses: `0` becomes `gnd`.
fn canonical(node: &str) -> &str {
    if is_ground(node) {
        GROUND
    } else {
        node
    }
}

/// The terminal pairs an element joins electrically, as (field, how
/// messages call it, the two nodes, whether it is a magnetic winding).
fn pairs<'c>(e: &'c Element, label: &str) -> Vec<(String, String, &'c [String; 2], bool)> {
    match e {
        Element::IdealTransformer(t) => vec![
            (
                "primary".into(),
                format!("{label}.primary"),
                &t.primary,
                true,
            ),
            (
                "secondary".into(),
                format!("{label}.secondary"),
                &t.secondary,
                true,
            ),
        ],
        Element::CoupledInductors(c) => c
            .windings
            .iter()
            .enumerate()
            .map(|(k, w)| {
                (
                    format!("windings[{k}].nodes"),
                    format!("{label}.{}", w.name),
                    &w.nodes,
                    true,
                )
            })
            .collect(),
        Element::Resistor(Resistor { nodes, .. })
        | Element::Inductor(Inductor { nodes, .. })
        | Element::Capacitor(Capacitor { nodes, .. })
        | Element::VoltageSource(VoltageSource { nodes, .. })
        | Element::CurrentSource(CurrentSource { nodes, .. })
        | Element::Switch(Switch { nodes, .. })
        | Element::Diode(Diode { nodes, .. }) => {
            vec![("nodes".into(), label.to_string(), nodes, false)]
        }
    }
}

/// The elements on the path from `from` to `to` in a forest given as
/// adjacency lists of (node, element); empty if there is none.
fn forest_path(adjacent: &[Vec<(usize, usize)>], from: usize, to: usize) -> Vec<usize> {
    let mut came: Vec<Option<(usize, usize)>> = vec![None; adjacent.len()];
    let mut seen = vec![false; adjacent.len()];
    let mut queue = VecDeque::from([from]);
    seen[from] = true;
    while let Some(v) = queue.pop_front() {
        if v == to {
            let mut path = Vec::new();
            let mut x = to;
            while let Some((prev, e)) = came[x] {
                path.push(e);
                x = prev;
            }
            path.reverse();
            return path;
        }
        for &(w, e) in &adjacent[v] {
            if !seen[w] {
                seen[w] = true;
                came[w] = Some((v, e));
                queue.push_back(w);
            }
        }
    }
    Vec::new()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn forest_path_names_the_sources_between_two_nodes() {
        // 0 -a- 1 -b- 2, 3 alone.
        let adj = vec![vec![(1, 10)], vec![(0, 10), (2, 11)], vec![(1, 11)], vec![]];
        assert_eq!(forest_path(&adj, 0, 2), vec![10, 11]);
        assert!(forest_path(&adj, 0, 3).is_empty());
    }
}
