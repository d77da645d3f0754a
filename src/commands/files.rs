//! Part files and checkpoints read back as untrusted input: a version tag, an integrity digest
//! of the content, a size limit and a check of every index, count and rate against the model
//! before any of it reaches the search or a report, so that an edited or damaged file is
//! refused with a message, never a panic.

use crate::model::Network;
use crate::model::{read_text_file, ReadProblem};
use crate::search::{self, BranchResult, Found, Part, SearchSettings, Strategy};

/// Version tag of a part file of `design --shard`.
pub const PART_FORMAT: &str = "ergopath-design-part/1";
/// Version tag of a checkpoint of `design --checkpoint`.
pub const CHECKPOINT_FORMAT: &str = "ergopath-design-checkpoint/1";
/// Version tag of a checkpoint of `uncertainty --checkpoint`.
pub const UNCERTAINTY_CHECKPOINT_FORMAT: &str = "ergopath-uncertainty-checkpoint/1";
/// Version tag of a checkpoint of `sweep --checkpoint`.
pub const SWEEP_CHECKPOINT_FORMAT: &str = "ergopath-sweep-checkpoint/1";

/// Largest part file or checkpoint read, in bytes.
pub const FILE_LIMIT: u64 = 256 << 20;

/// Slack of the budget checks: rates are kept to the limits up to round-off.
const BUDGET_SLACK: f64 = 1e-9;

/// Key of the integrity digest in part files and checkpoints.
pub const DIGEST_KEY: &str = "digest";

/// FNV-1a, 64 bits (Fowler, Noll and Vo; public domain): a check against damaged or edited
/// files, not against a forger, who could as well rerun the tool.
fn fnv1a(bytes: &[u8]) -> u64 {
    bytes.iter().fold(0xcbf2_9ce4_8422_2325, |h, &b| {
        (h ^ u64::from(b)).wrapping_mul(0x0000_0100_0000_01b3)
    })
}

/// The digest of a JSON value without its digest key, over its compact serialisation (keys in
/// the order serde_json keeps them; every float written in its shortest round-trip form, so a
/// file read back gives the same text).
fn digest_of(value: &serde_json::Value) -> Result<String, serde_json::Error> {
    Ok(format!(
        "{:016x}",
        fnv1a(serde_json::to_string(value)?.as_bytes())
    ))
}

/// Adds (or replaces) the digest key of a JSON object.
pub fn seal(value: &mut serde_json::Value) -> Result<(), serde_json::Error> {
    if let Some(map) = value.as_object_mut() {
        map.remove(DIGEST_KEY);
    }
    let digest = digest_of(value)?;
    if let Some(map) = value.as_object_mut() {
        map.insert(DIGEST_KEY.into(), digest.into());
    }
    Ok(())
}

/// The JSON text of a part file or checkpoint, sealed with its digest.
pub fn sealed_json<T: serde::Serialize>(
    content: &T,
) -> Result<String, crate::report::output::OutputError> {
    let mut value = serde_json::to_value(content)?;
    seal(&mut value)?;
    crate::report::output::to_json(&value)
}

/// The content of a sealed file without its digest, or why it cannot be trusted (in words).
pub fn unsealed(text: &str) -> Result<serde_json::Value, String> {
    let mut value: serde_json::Value = serde_json::from_str(text).map_err(|e| e.to_string())?;
    let Some(serde_json::Value::String(stated)) =
        value.as_object_mut().and_then(|map| map.remove(DIGEST_KEY))
    else {
        return Err(
            "it carries no integrity digest (an older version wrote it, or it was edited)".into(),
        );
    };
    let actual = digest_of(&value).map_err(|e| e.to_string())?;
    if stated != actual {
        return Err(format!(
            "its integrity digest {stated} does not match its content ({actual}): it was edited or damaged"
        ));
    }
    Ok(value)
}

/// The text of a part file or checkpoint, or why it cannot be read (in words).
pub fn read_untrusted(path: &std::path::Path) -> Result<String, String> {
    read_text_file(path, FILE_LIMIT).map_err(|problem| match problem {
        ReadProblem::Io(e) => e.to_string(),
        other => other.to_string(),
    })
}

/// Checks the search settings read from a file for sense.
pub fn check_settings(s: &SearchSettings) -> Result<(), String> {
    let b = &s.budget;
    if s.top == 0 || s.beam_width == 0 || b.max_pathways == 0 {
        return Err("its settings keep no design (top, beam width or max pathways is 0)".into());
    }
    for (name, value) in [
        ("rate cap", b.rate_cap),
        ("total rate", b.total_rate),
        ("work limit", b.work_limit),
    ] {
        if value.is_some_and(|v| !(v.is_finite() && v > 0.0)) {
            return Err(format!("its {name} is not a positive finite number"));
        }
    }
    if b.rate_cap.is_none() && b.total_rate.is_none() {
        return Err("its budget has no rate limit".into());
    }
    Ok(())
}

/// Checks candidate pathways against a network of `n` states: pairs of distinct states, the
/// same number of copies for every candidate.
pub fn check_candidates(candidates: &[Vec<(usize, usize)>], n: usize) -> Result<(), String> {
    let copies = candidates.first().map_or(1, Vec::len);
    for (i, c) in candidates.iter().enumerate() {
        if c.is_empty() || c.len() != copies {
            return Err(format!(
                "candidate pathway {i} acts on {} pairs; every candidate acts on {copies}",
                c.len()
            ));
        }
        for &(a, b) in c {
            if a >= n || b >= n || a == b {
                return Err(format!(
                    "candidate pathway {i} joins states {a} and {b}; the model has states 0..{}",
                    n.saturating_sub(1)
                ));
            }
        }
    }
    Ok(())
}

/// Checks one design read from a file: its set indexes the candidates (ascending, no repeats),
/// its pairs are those of the set, one finite log-rate per direction within the budget, finite
/// powers. `ranked` designs must carry their verified power.
pub fn check_found(
    d: &Found,
    network: &Network,
    candidates: &[Vec<(usize, usize)>],
    settings: &SearchSettings,
    ranked: bool,
) -> Result<(), String> {
    let count = candidates.len();
    if d.set.is_empty() || d.set.len() > settings.budget.max_pathways {
        return Err(format!(
            "a design has {} pathways; the budget allows 1 to {}",
            d.set.len(),
            settings.budget.max_pathways
        ));
    }
    if d.set.windows(2).any(|w| w[0] >= w[1]) || d.set.iter().any(|&i| i >= count) {
        return Err(format!(
            "a design's set {:?} is not an ascending list of candidate indices below {count}",
            d.set
        ));
    }
    let pairs: Vec<(usize, usize)> = d
        .set
        .iter()
        .flat_map(|&i| candidates[i].iter().copied())
        .collect();
    if d.pairs != pairs {
        return Err(format!(
            "a design's pairs {:?} are not those of its set {:?}",
            d.pairs, d.set
        ));
    }
    if d.copies != candidates.first().map_or(1, Vec::len) {
        return Err(format!(
            "a design acts on {} copies of each pair; its candidates have {}",
            d.copies,
            candidates.first().map_or(1, Vec::len)
        ));
    }
    if d.log_rates.len() != 2 * d.pairs.len() {
        return Err(format!(
            "a design lists {} log-rates for {} pathways (two per pathway are needed)",
            d.log_rates.len(),
            d.pairs.len()
        ));
    }
    if let Some(x) = d.log_rates.iter().find(|x| !x.is_finite()) {
        return Err(format!(
            "a design has the log-rate {x}, not a finite number"
        ));
    }
    let budget = &settings.budget;
    if let Some(cap) = budget.rate_cap {
        let peak = d
            .log_rates
            .iter()
            .copied()
            .fold(f64::NEG_INFINITY, f64::max);
        if peak > cap.ln() + BUDGET_SLACK {
            return Err(format!(
                "a design has the rate {:e}, above the rate cap {cap:e}",
                peak.exp()
            ));
        }
    }
    if let Some(total) = budget.total_rate {
        let sum: f64 = d.log_rates.iter().map(|x| x.exp()).sum();
        if sum > total * (1.0 + BUDGET_SLACK) {
            return Err(format!(
                "a design's rates add up to {sum:e}, above the total rate {total:e}"
            ));
        }
    }
    if let Some(limit) = budget.work_limit {
        for p in d.pathways(network) {
            if p.work.abs() > limit * (1.0 + BUDGET_SLACK) + BUDGET_SLACK {
                return Err(format!(
                    "a design's pathway {} -> {} does the work {} kT per jump, beyond the work limit {limit} kT",
                    p.from, p.to, p.work
                ));
            }
        }
    }
    if !d.power.is_finite() || !d.added_entropy.is_finite() {
        return Err("a design's power or entropy production is not a finite number".into());
    }
    match d.verified {
        Some((power, roundoff))
            if !(power.is_finite() && roundoff.is_finite() && roundoff >= 0.0) =>
        {
            Err("a design's verified power is not a finite number".into())
        }
        None if ranked => Err("a ranked design has no verified power".into()),
        _ => Ok(()),
    }
}

/// Sum of `values`, or an error when it overflows.
pub fn total(mut values: impl Iterator<Item = u64>) -> Result<u64, String> {
    values
        .try_fold(0u64, u64::checked_add)
        .ok_or_else(|| "its counts add up beyond 2^64".to_string())
}

/// Checks a part file's part against the model's network: shard, counts, candidates, designs.
pub fn check_part(part: &Part, network: &Network) -> Result<(), String> {
    let shard = part.shard;
    if shard.count == 0 || shard.index >= shard.count {
        return Err(format!(
            "it is shard {}/{}, which does not exist (0 <= i < N)",
            shard.index, shard.count
        ));
    }
    if part.strategy == Strategy::Beam && shard.count > 1 {
        return Err("it is a shard of a beam search, which is never split".into());
    }
    check_settings(&part.settings)?;
    check_candidates(&part.candidates, network.len())?;
    let count = part.candidates.len();
    let k = part.settings.budget.max_pathways.min(count);
    let space = search::space_size(count, k);
    if part.space != space || part.singles != count as u64 {
        return Err(format!(
            "it counts {} sets and {} single pathways; its {count} candidates give {space} and {count}",
            part.space, part.singles
        ));
    }
    if part.designs.len() > part.settings.top {
        return Err(format!(
            "it ranks {} designs, more than its top {}",
            part.designs.len(),
            part.settings.top
        ));
    }
    let branches = part.branches.len() as u64;
    let scored = total(part.branches.iter().map(|b| b.scored))?;
    let pruned = total(part.branches.iter().map(|b| b.pruned))?;
    total(
        part.branches
            .iter()
            .map(|b| b.scorings)
            .chain([part.single_scorings]),
    )?;
    if branches > space || scored > space || pruned > space || part.undetermined > space {
        return Err(format!(
            "its counts ({branches} branches, {scored} scored, {pruned} pruned, {} undetermined) exceed the {space} sets of the search",
            part.undetermined
        ));
    }
    if part.strategy == Strategy::Exhaustive {
        if let Some(b) = part.branches.iter().find(|b| b.branch >= count) {
            return Err(format!(
                "it has branch {}, beyond its {count} candidates",
                b.branch
            ));
        }
    }
    for d in &part.designs {
        check_found(d, network, &part.candidates, &part.settings, true)?;
    }
    Ok(())
}

/// Checks the totals of parts to be merged: their sums may not overflow.
pub fn check_totals(parts: &[Part]) -> Result<(), String> {
    let tallies = || parts.iter().flat_map(|p| &p.branches);
    total(
        tallies()
            .map(|b| b.scored)
            .chain(parts.iter().map(|p| p.singles)),
    )?;
    total(tallies().map(|b| b.pruned))?;
    total(
        tallies()
            .map(|b| b.scorings)
            .chain(parts.iter().map(|p| p.single_scorings)),
    )?;
    total(parts.iter().map(|p| p.undetermined))?;
    Ok(())
}

/// Checks the finished branches of a design checkpoint (whose identity already matched).
pub fn check_branches(
    finished: &[BranchResult],
    network: &Network,
    candidates: &[Vec<(usize, usize)>],
    settings: &SearchSettings,
) -> Result<(), String> {
    let mut seen = vec![false; candidates.len()];
    for r in finished {
        let b = r.tally.branch;
        match seen.get_mut(b) {
            None => {
                return Err(format!(
                    "it has branch {b}, beyond its {} candidates",
                    candidates.len()
                ))
            }
            Some(s) if *s => return Err(format!("it has branch {b} twice")),
            Some(s) => *s = true,
        }
        if r.designs.len() > settings.top {
            return Err(format!(
                "branch {b} ranks {} designs, more than the top {}",
                r.designs.len(),
                settings.top
            ));
        }
        for d in &r.designs {
            check_found(d, network, candidates, settings, false)?;
        }
    }
    let space = search::space_size(
        candidates.len(),
        settings.budget.max_pathways.min(candidates.len()),
    );
    let scored = total(finished.iter().map(|r| r.tally.scored))?;
    // The outcome adds the single-pathway sets to the count.
    total([scored, candidates.len() as u64].into_iter())?;
    let pruned = total(finished.iter().map(|r| r.tally.pruned))?;
    total(finished.iter().map(|r| r.tally.scorings))?;
    if scored > space || pruned > space {
        return Err(format!(
            "its branches count {scored} scored and {pruned} pruned sets, beyond the {space} sets of the search"
        ));
    }
    Ok(())
}

/// Whether a design's stored powers agree with a fresh verification of it: the verified power
/// (the same computation) to within both round-off bounds, the optimiser's power (another
/// solver of the same chain), by which designs are ranked, as [`power_agrees`].
pub fn agrees(d: &Found, fresh: &crate::bound::design::Verified) -> bool {
    let Some((verified, roundoff)) = d.verified else {
        return false;
    };
    let scale = fresh.power.abs();
    let round = 2.0 * (roundoff + fresh.roundoff);
    (verified - fresh.power).abs() <= round + 1e-12 * scale && power_agrees(d.power, fresh)
}

/// Whether the optimiser's power of a design (by which designs are ranked) agrees with its
/// verified power: within four times the round-off bound and a part in 10^8.
pub fn power_agrees(power: f64, verified: &crate::bound::design::Verified) -> bool {
    (power - verified.power).abs() <= 4.0 * verified.roundoff + 1e-8 * verified.power.abs()
}
