//! Independent cycles of a network: the fundamental cycle basis of a spanning tree (T. L. Hill,
//! J. Theor. Biol. 10, 442 (1966); J. Schnakenberg, Rev. Mod. Phys. 48, 571 (1976)). Each
//! channel outside the tree (a chord) closes one cycle with the tree path between its ends; the
//! net flux of that chord is the cycle's flux, and every channel's net flux is the sum of the
//! fluxes of the cycles through it. The affinity of a cycle (`sum` of `ln(k+/k-)` along it,
//! which local detailed balance makes the drive minus the work per turn, in kT) is its
//! thermodynamic force, and `sum_cycles flux x affinity` is the entropy production.
//!
//! Owns the graph side only (which channels, which way, the labels per turn); the fluxes come
//! from the steady state. It must not solve anything.

use super::Network;

/// One independent cycle, oriented along its chord's forward direction.
#[derive(Debug, Clone, PartialEq)]
pub struct Cycle {
    /// The channel outside the spanning tree that closes this cycle.
    pub chord: usize,
    /// The states visited in order, starting at the chord's `from` state (not repeated at the
    /// end).
    pub states: Vec<usize>,
    /// `(channel, +1 or -1)` along the cycle: +1 where the cycle runs the channel forward.
    pub channels: Vec<(usize, i8)>,
    /// Free energy drawn from the environment per turn (kT).
    pub drive: f64,
    /// Energy put into the work store per turn (kT).
    pub work: f64,
}

impl Cycle {
    /// Affinity per turn, drive minus work (kT): `sum +-ln(k+/k-)` along the cycle by LDB.
    pub fn affinity(&self) -> f64 {
        self.drive - self.work
    }
}

/// Most cycles listed: beyond it a table would be unreadable, and a cycle's tree path can be as
/// long as the network, so building every one would cost (cycles x states).
pub const LISTED_CYCLES: usize = 200;

/// [`cycle_basis`] when the network has at most [`LISTED_CYCLES`] independent cycles.
pub fn listed_cycles(network: &Network) -> Option<Vec<Cycle>> {
    (network.cycle_count() <= LISTED_CYCLES).then(|| cycle_basis(network))
}

/// The fundamental cycles of the breadth-first spanning tree from state 0 (channels taken in
/// file order), one per chord, in the order of the chords. A connected network has
/// `channels - states + 1` of them.
pub fn cycle_basis(network: &Network) -> Vec<Cycle> {
    let n = network.len();
    let mut adjacent: Vec<Vec<usize>> = vec![Vec::new(); n];
    for (c, ch) in network.channels.iter().enumerate() {
        adjacent[ch.from].push(c);
        adjacent[ch.to].push(c);
    }
    // parent[s] = (channel to the parent, the parent); depth for the path search.
    let mut parent: Vec<Option<(usize, usize)>> = vec![None; n];
    let mut depth = vec![usize::MAX; n];
    let mut in_tree = vec![false; network.channels.len()];
    let mut queue = std::collections::VecDeque::from([0]);
    depth[0] = 0;
    while let Some(s) = queue.pop_front() {
        for &c in &adjacent[s] {
            let ch = &network.channels[c];
            let t = if ch.from == s { ch.to } else { ch.from };
            if depth[t] == usize::MAX {
                depth[t] = depth[s] + 1;
                parent[t] = Some((c, s));
                in_tree[c] = true;
                queue.push_back(t);
            }
        }
    }
    (0..network.channels.len())
        .filter(|&c| !in_tree[c])
        .map(|chord| fundamental_cycle(network, chord, &parent, &depth))
        .collect()
}

/// The chord `a -> b` followed by the tree path from `b` back to `a`.
fn fundamental_cycle(
    network: &Network,
    chord: usize,
    parent: &[Option<(usize, usize)>],
    depth: &[usize],
) -> Cycle {
    let ch = &network.channels[chord];
    // Climb from both ends to the common ancestor: `up_b` runs b -> ancestor, `up_a` a -> it.
    let (mut x, mut y) = (ch.to, ch.from);
    let (mut up_b, mut up_a) = (Vec::new(), Vec::new());
    while x != y {
        if depth[x] >= depth[y] {
            if let Some((c, p)) = parent[x] {
                up_b.push((c, x));
                x = p;
            }
        } else if let Some((c, p)) = parent[y] {
            up_a.push((c, y));
            y = p;
        }
        if parent[x].is_none() && parent[y].is_none() && x != y {
            break; // not connected: cannot happen for a validated network
        }
    }
    let mut states = vec![ch.from, ch.to];
    let mut channels = vec![(chord, 1i8)];
    // b up to the ancestor: each step leaves `state` for its parent.
    for &(c, state) in &up_b {
        channels.push((c, sign_leaving(network, c, state)));
        states.push(other_end(network, c, state));
    }
    // The ancestor down to a: the reverse of a's climb.
    for &(c, state) in up_a.iter().rev() {
        let from = other_end(network, c, state);
        channels.push((c, sign_leaving(network, c, from)));
        states.push(state);
    }
    // The walk ends back at `from`, which is listed first already.
    states.pop();
    let per_turn = |label: fn(&super::Channel) -> f64| -> f64 {
        channels
            .iter()
            .map(|&(c, s)| f64::from(s) * label(&network.channels[c]))
            .sum()
    };
    Cycle {
        chord,
        drive: per_turn(|c| c.drive),
        work: per_turn(|c| c.work),
        states,
        channels,
    }
}

/// +1 when leaving `state` along channel `c` runs it forward.
fn sign_leaving(network: &Network, c: usize, state: usize) -> i8 {
    if network.channels[c].from == state {
        1
    } else {
        -1
    }
}

fn other_end(network: &Network, c: usize, state: usize) -> usize {
    let ch = &network.channels[c];
    if ch.from == state {
        ch.to
    } else {
        ch.from
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::Channel;

    fn channel(from: usize, to: usize, drive: f64, work: f64) -> Channel {
        Channel {
            from,
            to,
            forward: 1.0,
            backward: 1.0,
            work,
            drive,
        }
    }

    /// Every cycle is a closed walk through its channels, and the basis has E - N + 1 members.
    #[test]
    fn fundamental_cycles_are_closed_walks() {
        let net = Network {
            energies: vec![0.0; 5],
            channels: vec![
                channel(0, 1, 1.0, 0.0),
                channel(1, 2, 0.0, 0.5),
                channel(2, 3, 2.0, 0.0),
                channel(3, 0, 0.0, 0.0),
                channel(4, 2, 0.0, 0.0),
                channel(1, 4, 3.0, 1.0),
                channel(0, 2, 0.0, 0.0),
            ],
        };
        let cycles = cycle_basis(&net);
        assert_eq!(cycles.len(), net.cycle_count());
        for cycle in &cycles {
            let mut at = cycle.states[0];
            for (i, &(c, s)) in cycle.channels.iter().enumerate() {
                let ch = &net.channels[c];
                let (from, to) = if s > 0 {
                    (ch.from, ch.to)
                } else {
                    (ch.to, ch.from)
                };
                assert_eq!(from, at, "cycle of chord {}", cycle.chord);
                assert_eq!(cycle.states[i], at);
                at = to;
            }
            assert_eq!(at, cycle.states[0]);
            assert_eq!(cycle.states.len(), cycle.channels.len());
        }
    }
}
