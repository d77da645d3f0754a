//! Turns model text into a validated [`Model`]: TOML decoding, unit conversion, name
//! resolution, LDB completion and the structural checks of the model format. Each failure is
//! returned as a located [`ModelError`] with a suggested fix; nothing is printed here.

use super::file::{
    EnvironmentEntry, ModelFile, PairsEntry, PathwaysEntry, StateEntry, SwitchEntry,
    TransitionEntry,
};
use super::uncertainty::{ln_rate_sd, Uncertainty, Z_95};
use super::{
    log_ratio, Channel, Completion, Environments, Model, ModelError, Network, PairSelection,
    PathwayDefaults, TransitionInfo, DEFAULT_LDB_TOLERANCE, MAX_LDB_TOLERANCE,
};
use crate::units::{EnergyUnit, TimeUnit, Units};
use std::collections::HashMap;
use std::path::Path;
use toml::Spanned;

/// Shared context for building errors located in one file.
struct Ctx<'a> {
    path: &'a Path,
    text: &'a str,
}

impl Ctx<'_> {
    fn err<T>(
        &self,
        span: Option<usize>,
        problem: impl Into<String>,
        fix: impl Into<String>,
    ) -> Result<T, ModelError> {
        Err(ModelError::at(self.path, self.text, span, problem, fix))
    }

    fn at<T, U>(
        &self,
        value: &Spanned<U>,
        problem: impl Into<String>,
        fix: impl Into<String>,
    ) -> Result<T, ModelError> {
        self.err(Some(value.span().start), problem, fix)
    }
}

pub(super) fn parse_model(text: &str, path: &Path) -> Result<Model, ModelError> {
    let ctx = Ctx { path, text };
    if text.trim().is_empty() {
        return ctx.err(
            None,
            "the file is empty",
            "write a model there: `ergopath new NAME` writes a commented template to start from",
        );
    }
    let file: ModelFile = toml::from_str(text).map_err(|e| {
        ModelError::at(
            path,
            text,
            e.span().map(|s| s.start),
            format!("not a valid model file: {}", e.message().trim_end()),
            decode_fix(e.message()),
        )
    })?;
    let units = parse_units(&ctx, &file)?;
    let tolerance = match &file.ldb_tolerance {
        None => DEFAULT_LDB_TOLERANCE,
        Some(t) if t.get_ref().is_finite() && (0.0..=MAX_LDB_TOLERANCE).contains(t.get_ref()) && *t.get_ref() > 0.0 => *t.get_ref(),
        Some(t) => {
            return ctx.at(
                t,
                format!(
                    "ldb_tolerance must be a positive number of kT up to {MAX_LDB_TOLERANCE}, got {}",
                    t.get_ref()
                ),
                "use a small positive value in kT, e.g. ldb_tolerance = 1e-6; a mismatch of a kT or more is a different model, so correct the rates or the drive instead",
            )
        }
    };
    let (state_names, energies) = parse_states(&ctx, &file.state, &units)?;
    let index: HashMap<&str, usize> = state_names
        .iter()
        .enumerate()
        .map(|(i, n)| (n.as_str(), i))
        .collect();
    if file.transition.is_empty() {
        return ctx.err(
            None,
            "the model has no [[transition]]",
            "add at least one [[transition]] with from, to, forward and backward (or drive)",
        );
    }
    let mut channels = Vec::with_capacity(file.transition.len());
    let mut transitions = Vec::with_capacity(file.transition.len());
    for entry in &file.transition {
        let (channel, info) = parse_transition(&ctx, entry, &index, &energies, &units, tolerance)?;
        channels.push(channel);
        transitions.push(info);
    }
    let system = Network { energies, channels };
    let environment_names = parse_environments(&ctx, &file)?;
    let pathways = match &file.pathways {
        None => PathwayDefaults::default(),
        Some(p) => parse_pathways(&ctx, p.get_ref(), &index, &units)?,
    };
    let spreads = parse_uncertainty(&ctx, &file, &units, &system)?;
    let mut channel_transition: Vec<Option<usize>> = (0..system.channels.len()).map(Some).collect();
    let (network, state_names, transitions, environments, pathways) = match environment_names {
        None => {
            check_connected(&ctx, &system, &state_names, |i| {
                Some(file.state[i].span().start)
            })?;
            (system, state_names, transitions, None, pathways)
        }
        Some(names) => {
            let envs = Environments {
                names,
                system_states: state_names,
            };
            let (joint, infos, copies) = joint_network(&ctx, &file, &system, &transitions, &envs)?;
            channel_transition = copies;
            let joint_names = envs.joint_names();
            check_connected(&ctx, &joint, &joint_names, |j| {
                Some(file.state[envs.split(j).0].span().start)
            })?;
            // Pairs name system states; added pathways act within one environment state.
            let pathways = PathwayDefaults {
                pairs: pathways.pairs.map(|p| envs.within_each(&p)),
                ..pathways
            };
            (joint, joint_names, infos, Some(envs), pathways)
        }
    };
    let title = file.title.clone().unwrap_or_else(|| {
        path.file_stem()
            .map(|s| s.to_string_lossy().into_owned())
            .unwrap_or_default()
    });
    let cautions =
        super::caution::of_model(&units, file.temperature.is_some(), &network, &state_names);
    let state_system = match &environments {
        None => (0..network.len()).collect(),
        Some(envs) => (0..network.len()).map(|j| envs.split(j).0).collect(),
    };
    let uncertainty = spreads
        .map(|(energy_sd, ln_rate_sd, drive_sd)| Uncertainty {
            energy_sd,
            ln_rate_sd,
            drive_sd,
            channel_transition,
            state_system,
        })
        .filter(Uncertainty::is_any);
    Ok(Model {
        title,
        source: path.to_path_buf(),
        units,
        state_names,
        network,
        transitions,
        pathways,
        cautions,
        environments,
        uncertainty,
    })
}

/// Per-parameter standard deviations `(state energies, ln forward rates, drives)` in kT, or
/// `None` when the file gives no uncertainty at all.
type Spreads = (Vec<f64>, Vec<f64>, Vec<f64>);

/// The uncertainty keys: a rate factor must be at least 1 (1 is exact), an energy half-width
/// at least 0; a transition's drive takes the top-level default only when it is nonzero (a
/// step without drive stays without one).
fn parse_uncertainty(
    ctx: &Ctx,
    file: &ModelFile,
    units: &Units,
    system: &Network,
) -> Result<Option<Spreads>, ModelError> {
    let factor = |v: &Option<Spanned<f64>>| -> Result<Option<f64>, ModelError> {
        match v {
            None => Ok(None),
            Some(f) if f.get_ref().is_finite() && *f.get_ref() >= 1.0 && *f.get_ref() <= 1e6 => {
                Ok(Some(ln_rate_sd(*f.get_ref())))
            }
            Some(f) => ctx.at(
                f,
                format!("rate_uncertainty must be a factor from 1 to 1e6, got {}", f.get_ref()),
                "give the factor within which the rate lies with 95% confidence, e.g. rate_uncertainty = 3 (1 means exact)",
            ),
        }
    };
    let half_width = |v: &Option<Spanned<f64>>| -> Result<Option<f64>, ModelError> {
        match v {
            None => Ok(None),
            Some(u) if u.get_ref().is_finite() && *u.get_ref() >= 0.0 => {
                let kt = units.to_kt(*u.get_ref());
                if kt > 1e3 {
                    return ctx.at(
                        u,
                        format!(
                            "energy_uncertainty = {} {} is {kt} kT, too wide to sample",
                            u.get_ref(),
                            units.energy.name()
                        ),
                        "give the 95% half-width in the energy unit, well below 1000 kT",
                    );
                }
                Ok(Some(kt / Z_95))
            }
            Some(u) => ctx.at(
                u,
                format!(
                    "energy_uncertainty must be a number >= 0, got {}",
                    u.get_ref()
                ),
                format!(
                    "give the half-width of the 95% interval in {}, e.g. energy_uncertainty = 1",
                    units.energy.name()
                ),
            ),
        }
    };
    let default_rate = factor(&file.rate_uncertainty)?;
    let default_energy = half_width(&file.energy_uncertainty)?;
    let mut any = default_rate.is_some() || default_energy.is_some();
    let mut energy_sd = Vec::with_capacity(file.state.len());
    for entry in &file.state {
        let own = half_width(&entry.get_ref().energy_uncertainty)?;
        any |= own.is_some();
        energy_sd.push(own.or(default_energy).unwrap_or(0.0));
    }
    let (mut ln_rate_sd_of, mut drive_sd) = (Vec::new(), Vec::new());
    for (entry, channel) in file.transition.iter().zip(&system.channels) {
        let t = entry.get_ref();
        let (rate, energy) = (
            factor(&t.rate_uncertainty)?,
            half_width(&t.energy_uncertainty)?,
        );
        any |= rate.is_some() || energy.is_some();
        ln_rate_sd_of.push(rate.or(default_rate).unwrap_or(0.0));
        let inherited = default_energy.filter(|_| channel.drive != 0.0);
        drive_sd.push(energy.or(inherited).unwrap_or(0.0));
    }
    Ok(any.then_some((energy_sd, ln_rate_sd_of, drive_sd)))
}

/// The `[[environment]]` names, or `None` for a model without a fluctuating environment (then
/// `[[switch]]` tables and `environments` keys are errors).
fn parse_environments(ctx: &Ctx, file: &ModelFile) -> Result<Option<Vec<String>>, ModelError> {
    if file.environment.is_empty() {
        if let Some(s) = file.switch.first() {
            return ctx.at(s, "[[switch]] given but the model declares no [[environment]]", "declare the environment states with [[environment]] tables (name = ...), or remove the [[switch]]");
        }
        if let Some(e) = file
            .transition
            .iter()
            .find_map(|t| t.get_ref().environments.as_ref())
        {
            return ctx.at(
                e,
                "`environments` given but the model declares no [[environment]]",
                "declare the environment states with [[environment]] tables, or remove the key",
            );
        }
        return Ok(None);
    }
    if file.environment.len() < 2 {
        return ctx.at(&file.environment[0], "a fluctuating environment needs at least two [[environment]] states", "add another [[environment]] and the [[switch]] between them, or drop [[environment]] for a fixed environment");
    }
    let mut names: Vec<String> = Vec::new();
    for entry in &file.environment {
        let EnvironmentEntry { name } = entry.get_ref();
        if !valid_name(name.get_ref()) {
            return ctx.at(
                name,
                format!("environment name '{}' is not allowed", name.get_ref()),
                "use a non-empty name of ASCII letters, digits and _ - . :",
            );
        }
        if names.contains(name.get_ref()) {
            return ctx.at(
                name,
                format!("environment name '{}' is used twice", name.get_ref()),
                "give every environment state a unique name",
            );
        }
        names.push(name.get_ref().clone());
    }
    if file.switch.is_empty() {
        return ctx.at(
            &file.environment[0],
            "the environment states are declared but no [[switch]] joins them",
            "add [[switch]] tables with from, to, forward and backward rates",
        );
    }
    Ok(Some(names))
}

/// The joint chain over (system state, environment state): each transition copied into every
/// environment state where it exists, each switch copied for every system state (no work; its
/// drive follows from LDB, the switching rates being set by the outside world).
/// The joint network, the info of each of its channels, and the file transition each channel
/// copies (`None` for switches).
type JointChain = (Network, Vec<TransitionInfo>, Vec<Option<usize>>);

fn joint_network(
    ctx: &Ctx,
    file: &ModelFile,
    system: &Network,
    infos: &[TransitionInfo],
    envs: &Environments,
) -> Result<JointChain, ModelError> {
    let count = envs.names.len();
    let mut copies = Vec::new();
    let env_index = |name: &str| envs.names.iter().position(|n| n == name);
    let mut channels = Vec::new();
    let mut out_infos = Vec::new();
    for (t, ((entry, c), info)) in file
        .transition
        .iter()
        .zip(&system.channels)
        .zip(infos)
        .enumerate()
    {
        let present: Vec<usize> = match &entry.get_ref().environments {
            None => (0..count).collect(),
            Some(list) => {
                let mut present = Vec::new();
                for name in list.get_ref() {
                    match env_index(name) {
                        Some(e) => present.push(e),
                        None => {
                            return ctx.at(
                                list,
                                format!(
                                    "transition lists environment '{name}', which is not declared"
                                ),
                                format!(
                                    "use declared environment names: {}",
                                    envs.names.join(", ")
                                ),
                            )
                        }
                    }
                }
                if present.is_empty() {
                    return ctx.at(list, "`environments` is an empty list", "list the environment states where the transition exists, or remove the key for all of them");
                }
                present
            }
        };
        for e in present {
            channels.push(Channel {
                from: envs.joint(c.from, e),
                to: envs.joint(c.to, e),
                ..*c
            });
            out_infos.push(info.clone());
            copies.push(Some(t));
        }
    }
    for entry in &file.switch {
        let SwitchEntry {
            from,
            to,
            forward,
            backward,
        } = entry.get_ref();
        let find = |name: &Spanned<String>| {
            env_index(name.get_ref()).map_or_else(
                || {
                    ctx.at(
                        name,
                        format!(
                            "switch names environment '{}', which is not declared",
                            name.get_ref()
                        ),
                        format!("use one of: {}", envs.names.join(", ")),
                    )
                },
                Ok,
            )
        };
        let (a, b) = (find(from)?, find(to)?);
        if a == b {
            return ctx.at(
                to,
                "a switch must join two different environment states",
                "change `to`, or remove the switch",
            );
        }
        let (k_f, k_b) = (
            positive_rate(ctx, forward, "forward")?,
            positive_rate(ctx, backward, "backward")?,
        );
        for s in 0..system.len() {
            channels.push(Channel {
                from: envs.joint(s, a),
                to: envs.joint(s, b),
                forward: k_f,
                backward: k_b,
                work: 0.0,
                drive: log_ratio(k_f, k_b),
            });
            out_infos.push(TransitionInfo {
                label: Some(format!("switch {}->{}", from.get_ref(), to.get_ref())),
                completion: Completion::DriveImplied,
            });
            copies.push(None);
        }
    }
    let energies = (0..system.len() * count)
        .map(|j| system.energies[envs.split(j).0])
        .collect();
    Ok((Network { energies, channels }, out_infos, copies))
}

/// A fix for a TOML decoding message (unknown keys, wrong types, missing keys, syntax).
fn decode_fix(message: &str) -> String {
    if message.contains("unknown field") {
        "remove or correct the key; the model format lists every accepted key".into()
    } else if message.contains("missing field") {
        "add the required key to this table".into()
    } else if message.contains("invalid type") {
        "give the value the type the model format asks for (numbers unquoted, names quoted)".into()
    } else {
        "correct the TOML syntax at this place".into()
    }
}

fn parse_units(ctx: &Ctx, file: &ModelFile) -> Result<Units, ModelError> {
    let mut units = Units::default();
    if let Some(t) = &file.temperature {
        let value = *t.get_ref();
        if !(value.is_finite() && value > 0.0) {
            return ctx.at(
                t,
                format!("temperature must be a positive number of kelvin, got {value}"),
                "give the bath temperature in kelvin, e.g. temperature = 298.15",
            );
        }
        units.temperature = value;
    }
    if let Some(u) = &file.energy_unit {
        units.energy = EnergyUnit::parse(u.get_ref()).map_or_else(
            || {
                ctx.at(
                    u,
                    format!("unknown energy unit '{}'", u.get_ref()),
                    format!("use one of: {}", EnergyUnit::NAMES.join(", ")),
                )
            },
            Ok,
        )?;
    }
    if let Some(u) = &file.time_unit {
        units.time = TimeUnit::parse(u.get_ref()).map_or_else(
            || {
                ctx.at(
                    u,
                    format!("unknown time unit '{}'", u.get_ref()),
                    format!("use one of: {}", TimeUnit::NAMES.join(", ")),
                )
            },
            Ok,
        )?;
    }
    Ok(units)
}

fn valid_name(name: &str) -> bool {
    !name.is_empty()
        && name
            .chars()
            .all(|c| c.is_ascii_alphanumeric() || "_-.:".contains(c))
}

fn parse_states(
    ctx: &Ctx,
    entries: &[Spanned<StateEntry>],
    units: &Units,
) -> Result<(Vec<String>, Vec<f64>), ModelError> {
    if entries.len() < 2 {
        return ctx.err(
            entries.first().map(|s| s.span().start),
            format!(
                "the model has {} [[state]] entries; a network needs at least two",
                entries.len()
            ),
            "add [[state]] tables, each with a unique name (and an energy)",
        );
    }
    let mut names = Vec::with_capacity(entries.len());
    let mut energies = Vec::with_capacity(entries.len());
    let mut seen: HashMap<String, usize> = HashMap::new();
    for entry in entries {
        let state = entry.get_ref();
        let name = state.name.get_ref();
        if !valid_name(name) {
            return ctx.at(
                &state.name,
                format!("state name '{name}' is not allowed"),
                "use a non-empty name of ASCII letters, digits and _ - . :",
            );
        }
        if let Some(first) = seen.get(name) {
            let line = super::Position::of_offset(ctx.text, *first).line;
            return ctx.at(
                &state.name,
                format!("state name '{name}' is used twice (first on line {line})"),
                "give every state a unique name",
            );
        }
        seen.insert(name.clone(), state.name.span().start);
        let energy = match &state.energy {
            None => 0.0,
            Some(e) => finite_energy(ctx, e, units, "energy")?,
        };
        names.push(name.clone());
        energies.push(energy);
    }
    Ok((names, energies))
}

/// Largest energy magnitude accepted, in kT: beyond it no rate ratio is representable.
const MAX_ENERGY_KT: f64 = 1e5;

fn finite_energy(
    ctx: &Ctx,
    value: &Spanned<f64>,
    units: &Units,
    key: &str,
) -> Result<f64, ModelError> {
    let kt = units.to_kt(*value.get_ref());
    if !kt.is_finite() || kt.abs() > MAX_ENERGY_KT {
        return ctx.at(
            value,
            format!(
                "{key} = {} {} is {} kT, outside the representable range of +-{MAX_ENERGY_KT:e} kT",
                value.get_ref(),
                units.energy.name(),
                kt
            ),
            format!(
                "give {key} as a finite number in {} of moderate size",
                units.energy.name()
            ),
        );
    }
    Ok(kt)
}

fn positive_rate(ctx: &Ctx, value: &Spanned<f64>, key: &str) -> Result<f64, ModelError> {
    let rate = *value.get_ref();
    if !(rate.is_finite() && rate >= f64::MIN_POSITIVE) {
        let why = if rate.is_nan() {
            "not a number".to_string()
        } else if rate > 0.0 && rate.is_finite() {
            format!("{rate:e}, below the smallest normal double (2.2e-308)")
        } else {
            format!("{rate}")
        };
        return ctx.at(value, format!("{key} rate must be positive and finite, got {why}"), format!("give {key} as a positive rate per time unit; to remove a jump, remove the transition"));
    }
    Ok(rate)
}

fn parse_transition(
    ctx: &Ctx,
    entry: &Spanned<TransitionEntry>,
    index: &HashMap<&str, usize>,
    energies: &[f64],
    units: &Units,
    tolerance: f64,
) -> Result<(Channel, TransitionInfo), ModelError> {
    let t = entry.get_ref();
    let state = |name: &Spanned<String>| -> Result<usize, ModelError> {
        index.get(name.get_ref().as_str()).copied().map_or_else(
            || {
                let mut known: Vec<&str> = index.keys().copied().collect();
                known.sort_unstable();
                ctx.at(
                    name,
                    format!(
                        "transition names state '{}', which is not declared",
                        name.get_ref()
                    ),
                    format!(
                        "declare it with [[state]] or use one of: {}",
                        known.join(", ")
                    ),
                )
            },
            Ok,
        )
    };
    let (from, to) = (state(&t.from)?, state(&t.to)?);
    if from == to {
        return ctx.at(
            &t.to,
            format!("transition goes from '{}' to itself", t.from.get_ref()),
            "a transition must join two different states; remove it or change `to`",
        );
    }
    let forward = positive_rate(ctx, &t.forward, "forward")?;
    let work = match &t.work {
        None => 0.0,
        Some(w) => finite_energy(ctx, w, units, "work")?,
    };
    let bias = energies[from] - energies[to] - work; // ln(k+/k-) without the drive
    let (backward, drive, completion) = match (&t.backward, &t.drive) {
        (None, None) => {
            return ctx.at(entry, "transition gives neither `backward` nor `drive`", "add `backward = <rate>` (the drive then follows from LDB) or `drive = <energy>` (0 for a thermal transition)");
        }
        (Some(b), None) => {
            let backward = positive_rate(ctx, b, "backward")?;
            (
                backward,
                log_ratio(forward, backward) - bias,
                Completion::DriveImplied,
            )
        }
        (None, Some(d)) => {
            let drive = finite_energy(ctx, d, units, "drive")?;
            let backward = Channel::balanced(energies, from, to, forward, work, drive).backward;
            if !(backward.is_finite() && backward >= f64::MIN_POSITIVE) {
                return ctx.at(d, format!("LDB implies a backward rate of exp({:.4e}), which is not representable", forward.ln() - bias - drive), "give `backward` explicitly, or reduce the energy differences of this transition");
            }
            (backward, drive, Completion::BackwardImplied)
        }
        (Some(b), Some(d)) => {
            let backward = positive_rate(ctx, b, "backward")?;
            let drive = finite_energy(ctx, d, units, "drive")?;
            let mismatch = log_ratio(forward, backward) - (bias + drive);
            if mismatch.abs() > tolerance {
                return ctx.at(entry, format!("`backward` and `drive` disagree with local detailed balance by {mismatch:.6e} kT: ln(forward/backward) = {:.6} kT but E_from - E_to + drive - work = {:.6} kT", log_ratio(forward, backward), bias + drive), format!("drop one of `backward` and `drive` so LDB implies it, or correct them (tolerance {tolerance:e} kT, key ldb_tolerance)"));
            }
            (backward, drive, Completion::BothGiven)
        }
    };
    let channel = Channel {
        from,
        to,
        forward,
        backward,
        work,
        drive,
    };
    Ok((
        channel,
        TransitionInfo {
            label: t.label.clone(),
            completion,
        },
    ))
}

fn check_connected(
    ctx: &Ctx,
    network: &Network,
    names: &[String],
    locate: impl Fn(usize) -> Option<usize>,
) -> Result<(), ModelError> {
    let groups = network.components();
    if groups.len() <= 1 {
        return Ok(());
    }
    let describe = |g: &Vec<usize>| {
        let shown: Vec<&str> = g.iter().take(8).map(|&i| names[i].as_str()).collect();
        let more = if g.len() > 8 {
            format!(", ... ({} states)", g.len())
        } else {
            String::new()
        };
        format!("{{{}{}}}", shown.join(", "), more)
    };
    let listed: Vec<String> = groups.iter().take(6).map(describe).collect();
    let extra = if groups.len() > 6 {
        format!(" and {} more", groups.len() - 6)
    } else {
        String::new()
    };
    let first_of_second = groups[1][0];
    ctx.err(
        locate(first_of_second),
        format!(
            "the network is not strongly connected: it splits into {} groups of states: {}{extra}",
            groups.len(),
            listed.join(" ")
        ),
        "add transitions that join the groups, or model each group in its own file",
    )
}

fn parse_pathways(
    ctx: &Ctx,
    p: &PathwaysEntry,
    index: &HashMap<&str, usize>,
    units: &Units,
) -> Result<PathwayDefaults, ModelError> {
    let mut out = PathwayDefaults::default();
    if let Some(pairs) = &p.pairs {
        out.pairs = Some(match pairs.get_ref() {
            PairsEntry::Keyword(k) if k == "all" => PairSelection::All,
            PairsEntry::Keyword(k) => return ctx.at(
                pairs,
                format!("pairs = \"{k}\" is not understood"),
                "use pairs = \"all\" or a list such as pairs = [[\"A\", \"B\"], [\"B\", \"C\"]]",
            ),
            PairsEntry::List(list) => {
                let mut chosen = Vec::new();
                for [a, b] in list {
                    let find = |name: &String| {
                        index.get(name.as_str()).copied().map_or_else(|| ctx.at(pairs, format!("pathway pair [{a:?}, {b:?}] names state '{name}', which is not declared"), "use names declared with [[state]]"), Ok)
                    };
                    let (i, j) = (find(a)?, find(b)?);
                    if i == j {
                        return ctx.at(
                            pairs,
                            format!("pathway pair [{a:?}, {b:?}] joins a state to itself"),
                            "each pair must name two different states",
                        );
                    }
                    chosen.push((i.min(j), i.max(j)));
                }
                if chosen.is_empty() {
                    return ctx.at(
                        pairs,
                        "pairs is an empty list",
                        "list at least one pair, or use pairs = \"all\"",
                    );
                }
                chosen.sort_unstable();
                chosen.dedup();
                PairSelection::Only(chosen)
            }
        });
    }
    if let Some(k) = &p.max_pathways {
        if *k.get_ref() < 1 {
            return ctx.at(
                k,
                format!("max_pathways must be at least 1, got {}", k.get_ref()),
                "give a whole number of pathways, e.g. max_pathways = 2",
            );
        }
        out.max_pathways = Some(*k.get_ref() as usize);
    }
    let positive = |v: &Option<Spanned<f64>>, key: &str| -> Result<Option<f64>, ModelError> {
        match v {
            None => Ok(None),
            Some(x) if x.get_ref().is_finite() && *x.get_ref() > 0.0 => Ok(Some(*x.get_ref())),
            Some(x) => ctx.at(
                x,
                format!(
                    "{key} must be a positive finite number, got {}",
                    x.get_ref()
                ),
                format!("give {key} as a positive number, or remove it for no limit"),
            ),
        }
    };
    out.rate_cap = positive(&p.rate_cap, "rate_cap")?;
    out.total_rate = positive(&p.total_rate, "total_rate")?;
    out.work_limit = positive(&p.work_limit, "work_limit")?.map(|w| units.to_kt(w));
    Ok(out)
}
