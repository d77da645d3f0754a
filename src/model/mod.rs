//! The model: states, transitions, units and design defaults, validated and in internal units.
//!
//! Owns reading a TOML model file ([`Model::load`]), converting its units (energies to kT,
//! rates kept in the model's time unit), completing each transition by local detailed balance
//! (LDB), and rejecting anything invalid with a located [`ModelError`]. The computational core
//! that later stages use is the unit-free [`Network`]. This module must not solve anything:
//! no steady states, no optimisation, no printing.

pub mod caution;
pub mod cycles;
mod error;
mod file;
mod parse;
pub mod uncertainty;

pub use caution::{Caution, CautionKind};
pub use error::{Diagnostic, ModelError, Position};
pub use file::{read_text_file, ReadProblem, MODEL_SIZE_LIMIT};

use crate::units::Units;
use std::path::{Path, PathBuf};

/// Default LDB consistency tolerance in kT when a transition gives both `backward` and `drive`.
pub const DEFAULT_LDB_TOLERANCE: f64 = 1e-6;

/// Largest accepted `ldb_tolerance` (kT): beyond it `backward` and `drive` describe different
/// physics, and a tolerance of 1e9 once let a 48 kT mismatch through.
pub const MAX_LDB_TOLERANCE: f64 = 1.0;

pub use crate::numeric::log_ratio;

/// One channel of a network: a pair of opposite jumps between two distinct states.
///
/// Energies are in kT, rates in the model's time unit. LDB holds by construction:
/// `ln(forward / backward) = E_from - E_to + drive - work`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Channel {
    pub from: usize,
    pub to: usize,
    pub forward: f64,
    pub backward: f64,
    /// Energy put into the work store per forward jump (kT).
    pub work: f64,
    /// Free energy drawn from the environment per forward jump (kT).
    pub drive: f64,
}

impl Channel {
    /// The channel whose backward rate follows from LDB:
    /// `backward = forward exp(-(E_from - E_to + drive - work))` (energies in kT), in the log
    /// domain only where the product leaves the double range. The caller checks that the result
    /// is representable.
    pub fn balanced(
        energies: &[f64],
        from: usize,
        to: usize,
        forward: f64,
        work: f64,
        drive: f64,
    ) -> Self {
        // forward * exp(-x) rounds twice, and gives exactly `forward` where the labels balance
        // (x = 0); the log form is kept for products that leave the double range.
        let exponent = -(energies[from] - energies[to] + drive - work);
        let direct = forward * exponent.exp();
        let backward = if direct.is_normal() {
            direct
        } else {
            (forward.ln() + exponent).exp()
        };
        Self {
            from,
            to,
            forward,
            backward,
            work,
            drive,
        }
    }

    /// Net flux `forward p_from - backward p_to` at distribution `p`.
    pub fn flux(&self, p: &[f64]) -> f64 {
        self.forward * p[self.from] - self.backward * p[self.to]
    }
}

/// The unit-free computational core: state energies (kT) and channels.
///
/// Invariants (established by [`Model`] validation or by the constructor's caller): at least two
/// states, every rate positive and finite, every channel joins two distinct states in range, and
/// the graph of channels is connected (so the generator is irreducible).
#[derive(Debug, Clone, PartialEq)]
pub struct Network {
    pub energies: Vec<f64>,
    pub channels: Vec<Channel>,
}

impl Network {
    /// Number of states.
    pub fn len(&self) -> usize {
        self.energies.len()
    }

    /// True when the network has no states.
    pub fn is_empty(&self) -> bool {
        self.energies.is_empty()
    }

    /// Largest rate of any jump.
    pub fn max_rate(&self) -> f64 {
        self.channels
            .iter()
            .map(|c| c.forward.max(c.backward))
            .fold(0.0, f64::max)
    }

    /// Number of independent cycles (cyclomatic number `channels - states + 1` of a connected
    /// graph; parallel channels between one pair each close a cycle).
    pub fn cycle_count(&self) -> usize {
        (self.channels.len() + 1).saturating_sub(self.len())
    }

    /// Heat-bath equilibrium `peq_i = exp(-E_i) / Z`, as natural logarithms (never underflows).
    pub fn log_equilibrium(&self) -> Vec<f64> {
        let min = self.energies.iter().copied().fold(f64::INFINITY, f64::min);
        let log_z = self
            .energies
            .iter()
            .map(|e| (-(e - min)).exp())
            .sum::<f64>()
            .ln()
            - min;
        self.energies.iter().map(|e| -e - log_z).collect()
    }

    /// Connected groups of states (as state indices, each sorted, groups ordered by their
    /// smallest state). Channels are two-way, so connected means strongly connected.
    pub fn components(&self) -> Vec<Vec<usize>> {
        components(self.len(), self.channels.iter().map(|c| (c.from, c.to)))
    }

    /// The network with its energy labels multiplied: every work label by `work`, every drive
    /// by `drive`, every state energy by `energies`. Each channel keeps its forward rate and
    /// takes its backward rate from LDB, as a model file does when it gives the drive. `None`
    /// if a rate leaves the floating-point range.
    pub fn scaled(&self, work: f64, drive: f64, energies: f64) -> Option<Network> {
        self.relabelled(energies, |c| (c.work * work, c.drive * drive))
    }

    /// The network with every work label multiplied by `factor` and each drive raised by the
    /// same amount, `d + (factor - 1) w`: the store is charged at a higher potential and the
    /// environment pays for it, so every affinity and every rate stay as they are.
    pub fn with_stored_energy_scaled(&self, factor: f64) -> Network {
        // The rates are kept as they are (not recomputed from the new labels), so that no
        // rounding of the relabelled affinity can move them.
        Network {
            energies: self.energies.clone(),
            channels: self
                .channels
                .iter()
                .map(|c| Channel {
                    work: c.work * factor,
                    drive: c.drive + (factor - 1.0) * c.work,
                    ..*c
                })
                .collect(),
        }
    }

    /// Relabels every channel (`(work, drive)` from `labels`), multiplies the state energies by
    /// `energies`, keeps forward rates and takes backward rates from LDB.
    fn relabelled(
        &self,
        energies: f64,
        labels: impl Fn(&Channel) -> (f64, f64),
    ) -> Option<Network> {
        let states: Vec<f64> = self.energies.iter().map(|e| e * energies).collect();
        let channels = self
            .channels
            .iter()
            .map(|c| {
                let (w, d) = labels(c);
                let channel = Channel::balanced(&states, c.from, c.to, c.forward, w, d);
                let usable = |r: f64| r.is_finite() && r >= f64::MIN_POSITIVE;
                usable(channel.backward).then_some(channel)
            })
            .collect::<Option<Vec<_>>>()?;
        Some(Network {
            energies: states,
            channels,
        })
    }

    /// The network with extra channels appended.
    pub fn with_channels(&self, extra: &[Channel]) -> Network {
        let mut net = self.clone();
        net.channels.extend_from_slice(extra);
        net
    }
}

/// Connected groups of `n` vertices under undirected `edges` (union-find).
pub fn components(n: usize, edges: impl IntoIterator<Item = (usize, usize)>) -> Vec<Vec<usize>> {
    let mut parent: Vec<usize> = (0..n).collect();
    fn root(parent: &mut [usize], mut i: usize) -> usize {
        while parent[i] != i {
            parent[i] = parent[parent[i]];
            i = parent[i];
        }
        i
    }
    for (a, b) in edges {
        let (ra, rb) = (root(&mut parent, a), root(&mut parent, b));
        if ra != rb {
            parent[ra.max(rb)] = ra.min(rb);
        }
    }
    let mut groups: Vec<Vec<usize>> = Vec::new();
    let mut slot = vec![usize::MAX; n];
    for i in 0..n {
        let r = root(&mut parent, i);
        if slot[r] == usize::MAX {
            slot[r] = groups.len();
            groups.push(Vec::new());
        }
        groups[slot[r]].push(i);
    }
    groups
}

/// How a transition's missing half was completed by LDB.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Completion {
    /// The file gave `backward`; the drive was implied.
    DriveImplied,
    /// The file gave `drive`; the backward rate was implied.
    BackwardImplied,
    /// The file gave both, and they agreed within the tolerance.
    BothGiven,
}

/// Names and presentation data of one transition, parallel to `Network::channels`.
#[derive(Debug, Clone, PartialEq)]
pub struct TransitionInfo {
    pub label: Option<String>,
    pub completion: Completion,
}

/// Where added pathways may act.
#[derive(Debug, Clone, PartialEq, Default)]
pub enum PairSelection {
    /// Any pair of distinct states.
    #[default]
    All,
    /// Only these unordered pairs of state indices (each stored with the smaller index first).
    Only(Vec<(usize, usize)>),
}

/// Defaults for the design commands from the `[pathways]` table (flags override them).
/// Rates are in the model's time unit, `work_limit` in kT.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct PathwayDefaults {
    pub pairs: Option<PairSelection>,
    pub max_pathways: Option<usize>,
    pub rate_cap: Option<f64>,
    pub total_rate: Option<f64>,
    pub work_limit: Option<f64>,
}

/// A validated model in internal units.
#[derive(Debug, Clone, PartialEq)]
pub struct Model {
    pub title: String,
    /// The file it came from (for messages and result folders).
    pub source: PathBuf,
    pub units: Units,
    pub state_names: Vec<String>,
    pub network: Network,
    pub transitions: Vec<TransitionInfo>,
    pub pathways: PathwayDefaults,
    /// Plausibility cautions about the model as written ([`caution::of_model`]).
    pub cautions: Vec<Caution>,
    /// The fluctuating environment, when the model has one: then the network is the joint
    /// chain over (system state, environment state) and `state_names` are `state@environment`.
    pub environments: Option<Environments>,
    /// The parameters' uncertainty, when the file gives any.
    pub uncertainty: Option<uncertainty::Uncertainty>,
}

/// A fluctuating environment: joint state `s * E + e` is system state `s` in environment
/// state `e` (of `E`).
#[derive(Debug, Clone, PartialEq)]
pub struct Environments {
    pub names: Vec<String>,
    pub system_states: Vec<String>,
}

impl Environments {
    pub fn count(&self) -> usize {
        self.names.len()
    }

    /// Joint index of system state `s` in environment state `e`.
    pub fn joint(&self, s: usize, e: usize) -> usize {
        s * self.count() + e
    }

    /// `(system state, environment state)` of a joint index.
    pub fn split(&self, j: usize) -> (usize, usize) {
        (j / self.count(), j % self.count())
    }

    /// `state@environment` for every joint state, in joint order.
    pub fn joint_names(&self) -> Vec<String> {
        (0..self.system_states.len() * self.count())
            .map(|j| {
                let (s, e) = self.split(j);
                format!("{}@{}", self.system_states[s], self.names[e])
            })
            .collect()
    }

    /// The joint copies `(a@e, b@e)` of system pair `(a, b)`, one per environment state.
    pub fn copies(&self, (a, b): (usize, usize)) -> Vec<(usize, usize)> {
        (0..self.count())
            .map(|e| (self.joint(a, e), self.joint(b, e)))
            .collect()
    }

    /// System pairs of a selection over system states.
    pub fn system_pairs(&self, pairs: &PairSelection) -> Vec<(usize, usize)> {
        match pairs {
            PairSelection::All => {
                let n = self.system_states.len();
                (0..n)
                    .flat_map(|a| (a + 1..n).map(move |b| (a, b)))
                    .collect()
            }
            PairSelection::Only(list) => list.clone(),
        }
    }

    /// A selection over system states made into joint pairs within each environment state:
    /// added pathways act between system states and never change the environment.
    pub fn within_each(&self, pairs: &PairSelection) -> PairSelection {
        let mut joint: Vec<(usize, usize)> = self
            .system_pairs(pairs)
            .into_iter()
            .flat_map(|p| self.copies(p))
            .collect();
        joint.sort_unstable();
        PairSelection::Only(joint)
    }
}

impl Model {
    /// Reads and validates a model file.
    pub fn load(path: &Path) -> Result<Model, ModelError> {
        Self::parse(&Self::read_text(path)?, path)
    }

    /// The text of a model file, read as every input file is (regular files only, at most
    /// 64 MB, UTF-8), each failure a located [`ModelError`].
    pub fn read_text(path: &Path) -> Result<String, ModelError> {
        use file::{read_text_file, ReadProblem, MODEL_SIZE_LIMIT};
        read_text_file(path, MODEL_SIZE_LIMIT).map_err(|problem| match problem {
            ReadProblem::Io(source) => ModelError::Unreadable {
                path: path.to_path_buf(),
                source,
            },
            ReadProblem::NotUtf8(offset) => ModelError::at(
                path,
                "",
                None,
                format!("the file is not UTF-8 text (invalid byte at offset {offset})"),
                "save the model as UTF-8 encoded TOML text",
            ),
            ReadProblem::NotRegular(_) => ModelError::at(
                path,
                "",
                None,
                format!("cannot read the model file: {problem}"),
                "give the path of a model file (TOML text)",
            ),
            ReadProblem::TooLarge { .. } => ModelError::at(
                path,
                "",
                None,
                format!("the model file is refused unread: {problem}"),
                "split the model, or generate it with fewer states; model files are limited to 64 MB",
            ),
        })
    }

    /// Validates model text; `path` is used in messages and as the default title.
    pub fn parse(text: &str, path: &Path) -> Result<Model, ModelError> {
        parse::parse_model(text, path)
    }

    /// Index of the state with this name.
    pub fn state_index(&self, name: &str) -> Option<usize> {
        self.state_names.iter().position(|n| n == name)
    }

    /// File stem used for the results folder (`results/<stem>/`).
    pub fn stem(&self) -> String {
        self.source
            .file_stem()
            .map(|s| s.to_string_lossy().into_owned())
            .unwrap_or_else(|| "model".to_string())
    }

    /// Where added pathways may act by default: the `[pathways]` pairs, else every pair (with a
    /// fluctuating environment: every pair of system states within each environment state).
    pub fn default_pairs(&self) -> PairSelection {
        self.pathways
            .pairs
            .clone()
            .unwrap_or_else(|| match &self.environments {
                Some(envs) => envs.within_each(&PairSelection::All),
                None => PairSelection::All,
            })
    }

    /// Parses a pair list such as `A/B,C/D` (or `all`) against this model's state names. With a
    /// fluctuating environment, system state names stand for their copies in every environment
    /// state and `state@environment` names for one copy.
    pub fn parse_pairs(&self, text: &str) -> Result<PairSelection, String> {
        let text = text.trim();
        if let Some(envs) = &self.environments {
            if text == "all" {
                return Ok(envs.within_each(&PairSelection::All));
            }
            let system = envs
                .system_states
                .iter()
                .position(|n| n == text.split('/').next().unwrap_or("").trim());
            if system.is_some() || !text.contains('@') {
                let view = Model {
                    state_names: envs.system_states.clone(),
                    environments: None,
                    ..self.clone()
                };
                return Ok(envs.within_each(&view.parse_pairs(text)?));
            }
        }
        if text == "all" {
            return Ok(PairSelection::All);
        }
        let mut pairs = Vec::new();
        for item in text.split(',').map(str::trim).filter(|s| !s.is_empty()) {
            let (a, b) = item
                .split_once('/')
                .ok_or_else(|| format!("pair '{item}' is not of the form FROM/TO (e.g. A/B)"))?;
            let find = |name: &str| {
                self.state_index(name.trim()).ok_or_else(|| {
                    format!(
                        "pair '{item}' names state '{}', which the model does not have (states: {})",
                        name.trim(),
                        self.state_names.join(", ")
                    )
                })
            };
            let (i, j) = (find(a)?, find(b)?);
            if i == j {
                return Err(format!("pair '{item}' joins a state to itself"));
            }
            if let Some(envs) = &self.environments {
                if envs.split(i).1 != envs.split(j).1 {
                    return Err(format!(
                        "pair '{item}' joins two environment states: added pathways act within one environment state and can never change it; name both states in the same environment (e.g. A@light/B@light)"
                    ));
                }
            }
            pairs.push((i.min(j), i.max(j)));
        }
        if pairs.is_empty() {
            return Err("the pair list is empty: give `all` or pairs like A/B,C/D".into());
        }
        pairs.sort_unstable();
        pairs.dedup();
        Ok(PairSelection::Only(pairs))
    }
}
