//! The `check` report: a validated model summarised, with what LDB implied and its cycles (the
//! basis from [`crate::model::cycles`]; no physics here).

use super::table::{num, Align, Table};
use super::{transition_name, UnitsJson};
use crate::model::cycles::listed_cycles;
use crate::model::{Completion, Model};
use serde::Serialize;

/// A state as `check` lists it: its energy in the model's unit.
#[derive(Debug, Clone, Serialize)]
pub struct StateJson {
    pub name: String,
    pub energy: f64,
}

/// A transition as `check` lists it, in the model's units, with what LDB implied.
#[derive(Debug, Clone, Serialize)]
pub struct TransitionJson {
    pub from: String,
    pub to: String,
    pub label: Option<String>,
    pub forward: f64,
    pub backward: f64,
    pub drive: f64,
    pub work: f64,
    /// `backward` or `drive`: the value local detailed balance supplied; `none` when the file
    /// gave both (and they agreed within the tolerance).
    pub implied: &'static str,
}

/// The `check` report in machine form: the model as the tool read it.
#[derive(Debug, Clone, Serialize)]
pub struct CheckReport {
    pub title: String,
    pub units: UnitsJson,
    pub states: Vec<StateJson>,
    pub transitions: Vec<TransitionJson>,
    pub cycles: Vec<super::cycles::CycleJson>,
}

impl CheckReport {
    pub fn new(model: &Model) -> Self {
        let u = &model.units;
        let net = &model.network;
        let basis = listed_cycles(net).unwrap_or_default();
        Self {
            title: model.title.clone(),
            units: UnitsJson::of(model),
            states: model
                .state_names
                .iter()
                .zip(&net.energies)
                .map(|(name, e)| StateJson {
                    name: name.clone(),
                    energy: u.from_kt(*e),
                })
                .collect(),
            transitions: net
                .channels
                .iter()
                .zip(&model.transitions)
                .map(|(ch, info)| TransitionJson {
                    from: model.state_names[ch.from].clone(),
                    to: model.state_names[ch.to].clone(),
                    label: info.label.clone(),
                    forward: ch.forward,
                    backward: ch.backward,
                    drive: u.from_kt(ch.drive),
                    work: u.from_kt(ch.work),
                    implied: match info.completion {
                        Completion::BackwardImplied => "backward",
                        Completion::DriveImplied => "drive",
                        Completion::BothGiven => "none",
                    },
                })
                .collect(),
            cycles: super::cycles::cycles_json(model, &basis, None),
        }
    }

    /// The tables as CSV: states (first, as in the text), transitions, cycles.
    pub fn csv(&self, model: &Model) -> Vec<(&'static str, String)> {
        use super::csv::{per, with_unit, Csv};
        let (e, t) = (self.units.energy, model.units.time.name());
        let mut states = Csv::new(&["state".to_string(), with_unit("energy", e)]);
        for s in &self.states {
            states.row(vec![(&s.name).into(), s.energy.into()]);
        }
        let mut transitions = Csv::new(&[
            "from".to_string(),
            "to".into(),
            "label".into(),
            with_unit("forward", &per(t)),
            with_unit("backward", &per(t)),
            with_unit("drive", e),
            with_unit("work", e),
            "implied".into(),
        ]);
        for tr in &self.transitions {
            transitions.row(vec![
                (&tr.from).into(),
                (&tr.to).into(),
                tr.label.as_deref().into(),
                tr.forward.into(),
                tr.backward.into(),
                tr.drive.into(),
                tr.work.into(),
                tr.implied.into(),
            ]);
        }
        vec![
            ("states", states.finish()),
            ("transitions", transitions.finish()),
            ("cycles", super::cycles::cycles_csv(model, &self.cycles)),
        ]
    }
}

/// Summary of a valid model: units, states, transitions with implied values marked, cycles.
pub fn check_text(model: &Model) -> String {
    let u = &model.units;
    let e = u.energy.name();
    let net = &model.network;
    let mut out = format!(
        "{}: valid model \"{}\"\n  {} states, {} transitions, {} independent cycles\n  T = {} K, energies in {e}, rates per {}\n\n",
        model.source.display(),
        model.title,
        net.len(),
        net.channels.len(),
        net.cycle_count(),
        u.temperature,
        u.time.name()
    );
    let mut states = Table::new(&[
        ("state", Align::Left),
        (&format!("energy /{e}"), Align::Right),
    ]);
    for (name, energy) in model.state_names.iter().zip(&net.energies) {
        states.row(vec![name.clone(), num(u.from_kt(*energy))]);
    }
    out.push_str(&states.render());
    out.push('\n');
    let mut tr = Table::new(&[
        ("transition", Align::Left),
        ("forward", Align::Right),
        ("backward", Align::Right),
        ("drive", Align::Right),
        ("work", Align::Right),
    ]);
    for (c, ch) in net.channels.iter().enumerate() {
        let completion = model.transitions[c].completion;
        let mark = |implied: bool, text: String| {
            if implied {
                format!("{text}*")
            } else {
                format!("{text} ")
            }
        };
        tr.row(vec![
            transition_name(model, c),
            num(ch.forward),
            mark(completion == Completion::BackwardImplied, num(ch.backward)),
            mark(
                completion == Completion::DriveImplied,
                num(u.from_kt(ch.drive)),
            ),
            num(u.from_kt(ch.work)),
        ]);
    }
    out.push_str(&tr.render());
    out.push_str("  * implied by local detailed balance\n\n");
    let basis = listed_cycles(&model.network).unwrap_or_default();
    let cycles = super::cycles::cycles_json(model, &basis, None);
    out.push_str(&super::cycles::cycles_text(model, &cycles));
    out
}
