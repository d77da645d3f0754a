//! `ergopath draw`: network diagrams (SVG, and DOT with `--dot`) of the baseline steady state,
//! of the universal bound's optimal distribution, and of a design (the bound's attaining design,
//! or one read from a saved `design.json` / `bound.json`).
//!
//! Runs the stages and hands plain numbers to [`crate::report::network`]; nothing here lays
//! out, prints or exits. `--save` writes `network-<what>.txt`, `.svg` and `.dot` as one set
//! through [`super::save`] (manifest and `report.md` included).

use super::{folder_name, resolve_pairs, save, Error, SPEED_TABLE_FRACTIONS};
use crate::bound::design::{self, Pathway};
use crate::bound::{self, BoundSettings};
use crate::model::{Channel, Model, Network};
use crate::report::network::Diagram;
use crate::report::output::printable;
use crate::steady::{self, Observables, SteadySettings};
use std::path::{Path, PathBuf};

/// What a diagram shows.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum DrawOf {
    /// The model's own steady state.
    #[default]
    Baseline,
    /// The optimal distribution `p*` of the universal bound.
    Bound,
    /// A design: the bound's attaining tree design, or the one of `--design FILE`.
    Design,
}

/// Settings of `ergopath draw`.
#[derive(Debug, Clone, Default)]
pub struct DrawRequest {
    /// `None`: the baseline, or the design of `design` when a file is given.
    pub of: Option<DrawOf>,
    /// A saved `design.json` (ranked designs) or `bound.json` (its attaining design).
    pub design: Option<PathBuf>,
    /// Which ranked design of `design` (1 = best).
    pub rank: usize,
    /// Print the DOT form instead of the SVG.
    pub dot: bool,
    /// Also write the forms under `<save_root>/<model name>/`.
    pub save_root: Option<PathBuf>,
}

/// Share of the headroom the drawn attaining design reaches (the `bound` command's default).
const DESIGN_TARGET: f64 = 0.99;

/// Relative tolerance of a net flux at the bound's `p*` (a share of the channel's one-way
/// traffic): `p*` is known to the optimiser's tolerance, so smaller fluxes get no direction.
const OPTIMUM_FLUX_TOLERANCE: f64 = 1e-9;

/// `ergopath draw`: the diagram as SVG (or DOT); with `--save` the text summary, SVG and DOT
/// are written and the summary is printed (the DOT with `--dot`).
pub fn draw(path: &Path, request: &DrawRequest) -> Result<String, Error> {
    draw_on(&Model::load(path)?, request)
}

/// [`draw`] on a model in memory.
pub fn draw_on(model: &Model, request: &DrawRequest) -> Result<String, Error> {
    let of = match (request.of, &request.design) {
        (None, Some(_)) | (Some(DrawOf::Design), _) => DrawOf::Design,
        (Some(other), Some(_)) => {
            return Err(Error::Usage(format!(
            "--design FILE draws a design, but --of {} was given: drop --of or give --of design",
            match other {
                DrawOf::Bound => "bound",
                _ => "baseline",
            }
        )))
        }
        (Some(of), None) => of,
        (None, None) => DrawOf::Baseline,
    };
    if request.rank == 0 || (request.rank != 1 && request.design.is_none()) {
        return Err(Error::Usage(format!(
            "--rank {}: give a rank from 1 (the best) with --design FILE of a saved design.json",
            request.rank
        )));
    }
    let (name, diagram) = match of {
        DrawOf::Baseline => ("network-baseline".to_string(), baseline(model)?),
        DrawOf::Bound => ("network-bound".to_string(), optimum(model)?),
        DrawOf::Design => match &request.design {
            Some(file) => (
                format!("network-design-{}", request.rank),
                from_file(model, file, request.rank)?,
            ),
            None => ("network-design".to_string(), attaining(model)?),
        },
    };
    let clean = |text: String| printable(&text).into_owned();
    let (text, svg, dot) = (
        clean(diagram.text()),
        clean(diagram.svg()),
        clean(diagram.dot()),
    );
    let Some(root) = request.save_root.as_deref() else {
        return Ok(if request.dot { dot } else { svg });
    };
    let files = [
        (format!("{name}.txt"), text.as_str()),
        (format!("{name}.svg"), svg.as_str()),
        (format!("{name}.dot"), dot.as_str()),
    ];
    let listed: Vec<(&str, &str)> = files.iter().map(|(n, c)| (n.as_str(), *c)).collect();
    let note = save(root, &folder_name(model), &model.title, &name, &listed)?;
    Ok(if request.dot { dot } else { text + &note })
}

/// The SVG diagram of the baseline steady state (also saved by `steady --save`).
pub fn baseline_svg(model: &Model, p: &[f64], obs: &Observables) -> String {
    baseline_diagram(model, p, obs).svg()
}

fn baseline_diagram(model: &Model, p: &[f64], obs: &Observables) -> Diagram {
    let u = &model.units;
    Diagram::of_network(
        model,
        &model.network,
        p,
        &obs.fluxes,
        &obs.flux_roundoff,
        "baseline steady state".into(),
        vec![format!(
            "harvesting power {} {}/{} (methods, section 1)",
            crate::report::table::bounded(u.from_kt(obs.power), u.from_kt(obs.power_roundoff)),
            u.energy.name(),
            u.time.name()
        )],
    )
}

/// The baseline diagram from a fresh steady-state solve.
fn baseline(model: &Model) -> Result<Diagram, Error> {
    let state = steady::solve(&model.network, &SteadySettings::default())?;
    let obs = steady::observe(&model.network, &state.probabilities);
    Ok(baseline_diagram(model, &state.probabilities, &obs))
}

/// The universal bound over the model's default pairs.
fn solve_bound(model: &Model) -> Result<(crate::model::PairSelection, bound::Bound), Error> {
    let pairs = resolve_pairs(model, None)?;
    let solved = bound::solve(&model.network, &pairs, &BoundSettings::default())?;
    Ok((pairs, solved))
}

/// The bound's optimal distribution `p*`, with the model's channels at `p*`.
fn optimum(model: &Model) -> Result<Diagram, Error> {
    let (_, solved) = solve_bound(model)?;
    let net = &model.network;
    let fluxes: Vec<f64> = net.channels.iter().map(|c| c.flux(&solved.p)).collect();
    let tolerance: Vec<f64> = net
        .channels
        .iter()
        .map(|c| {
            OPTIMUM_FLUX_TOLERANCE * (c.forward * solved.p[c.from] + c.backward * solved.p[c.to])
        })
        .collect();
    let u = &model.units;
    let power_unit = format!("{}/{}", u.energy.name(), u.time.name());
    Ok(Diagram::of_network(
        model,
        net,
        &solved.p,
        &fluxes,
        &tolerance,
        "optimal distribution p* of the universal bound".into(),
        vec![
            format!(
                "bound: harvesting power at most {} {power_unit} (baseline {} {power_unit}); disc areas from p*",
                crate::report::table::num(u.from_kt(solved.certified_upper)),
                crate::report::table::num(u.from_kt(solved.baseline_power))
            ),
            "arrows: the model's own transitions at p*; the added pathways of the attaining design (draw --of design) carry the rest of the flux (methods, sections 3 and 4)".into(),
        ],
    ))
}

/// The attaining tree design of the bound at 99% of the headroom.
fn attaining(model: &Model) -> Result<Diagram, Error> {
    let (pairs, solved) = solve_bound(model)?;
    let found = design::attaining(
        &model.network,
        &solved,
        &pairs,
        DESIGN_TARGET,
        &SPEED_TABLE_FRACTIONS,
    )?;
    let Some(chosen) = found.design else {
        return Err(Error::Usage(format!(
            "{}: the bound leaves no headroom over the baseline, so there is no design to draw\n  fix: draw --of baseline or --of bound",
            printable(&model.source.display().to_string())
        )));
    };
    let u = &model.units;
    let note = format!(
        "the bound's attaining design at {}% of the headroom (bound {} {}/{})",
        DESIGN_TARGET * 100.0,
        crate::report::table::num(u.from_kt(solved.certified_upper)),
        u.energy.name(),
        u.time.name()
    );
    with_pathways(
        model,
        chosen.pathways,
        "attaining design of the bound",
        note,
    )
}

/// The design ranked `rank` in a saved design or bound report.
fn from_file(model: &Model, file: &Path, rank: usize) -> Result<Diagram, Error> {
    let pathways = super::precision::read_ranked_design(file, model, rank)?;
    let note = format!(
        "design ranked {rank} in {}",
        printable(&file.display().to_string())
    );
    with_pathways(model, pathways, &format!("design ranked {rank}"), note)
}

/// The diagram of the model with `pathways` added, at the joint steady state (the design's
/// verification solve), each pathway written along its net flux.
fn with_pathways(
    model: &Model,
    pathways: Vec<Pathway>,
    what: &str,
    note: String,
) -> Result<Diagram, Error> {
    let pathways = design::oriented(&model.network, pathways)?;
    let extra: Vec<Channel> = pathways.iter().map(Pathway::channel).collect();
    let joint: Network = model.network.with_channels(&extra);
    let state = steady::solve(&joint, &SteadySettings::default())?;
    let obs = steady::observe(&joint, &state.probabilities);
    let u = &model.units;
    Ok(Diagram::of_network(
        model,
        &joint,
        &state.probabilities,
        &obs.fluxes,
        &obs.flux_roundoff,
        format!(
            "{what}: {} added pathway{}, at its steady state",
            pathways.len(),
            if pathways.len() == 1 { "" } else { "s" }
        ),
        vec![
            note,
            format!(
                "verified harvesting power {} {}/{} (methods, section 4)",
                crate::report::table::bounded(u.from_kt(obs.power), u.from_kt(obs.power_roundoff)),
                u.energy.name(),
                u.time.name()
            ),
        ],
    ))
}
