//! The `check` report: a validated model summarised, with what LDB implied and its cycles (the
//! basis from [`crate::model::cycles`]; no physics here).

use super::table::{num, Align, Table};
use super::transition_name;
use crate::model::cycles::listed_cycles;
use crate::model::{Completion, Model};

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
