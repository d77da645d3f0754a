//! Random valid models through the whole pipeline (steady state, bound, design search), with
//! the invariants every result must keep: probabilities positive and summing to one, the
//! free-energy balance D - W = kT sigma (methods, section 1), a certified upper value at
//! least the attained bound, and no verified design above it (section 3).

use crate::common::network_strategy;
use ergopath::bound::BoundSettings;
use ergopath::search::{self, Budget, SearchSettings, Searcher, Shard, Silent};
use ergopath::steady::{self, SteadySettings};
use proptest::prelude::*;

proptest! {
    #![proptest_config(ProptestConfig { cases: 40, rng_seed: crate::common::PROPTEST_SEED, ..ProptestConfig::default() })]

    #[test]
    fn pipeline_keeps_its_invariants(net in network_strategy(5), cap in -1.0f64..3.0, k in 1usize..=2) {
        let state = steady::solve(&net, &SteadySettings::default()).unwrap();
        let p = &state.probabilities;
        prop_assert!(p.iter().all(|x| *x > 0.0));
        prop_assert!((p.iter().sum::<f64>() - 1.0).abs() < 1e-12);
        // D - W = kT sigma to round-off: net fluxes are differences of one-way fluxes, so the
        // scale is the gross traffic times the forces and labels.
        let obs = steady::observe(&net, p);
        let traffic: f64 = net.channels.iter().map(|c| {
            let force = (c.forward / c.backward).ln() + (p[c.from] / p[c.to]).ln();
            (c.forward * p[c.from] + c.backward * p[c.to]) * (force.abs() + c.work.abs() + c.drive.abs())
        }).sum();
        let imbalance = obs.drive_power - obs.power - obs.entropy_production;
        prop_assert!(imbalance.abs() <= 1e-12 * traffic, "imbalance {imbalance} vs traffic {traffic}");
        let b = crate::common::certified_bound(&net, &BoundSettings::default());
        prop_assume!(b.is_some(), "round-off decides this bound");
        let b = b.unwrap();
        prop_assert!(b.certified_upper >= b.power);
        prop_assert!(b.power >= b.baseline_power - 1e-9 * b.baseline_power.abs().max(1e-12));
        let n = net.len();
        let candidates = (0..n).flat_map(|a| (a + 1..n).map(move |c| vec![(a, c)])).collect();
        let budget = Budget { max_pathways: k, rate_cap: Some(10f64.powf(cap)), total_rate: None, work_limit: None };
        let searcher = Searcher::new(&net, candidates, SearchSettings { top: 5, ..SearchSettings::new(budget) }, (b.baseline_power, b.headroom())).unwrap();
        let outcome = search::merge(vec![searcher.run(Shard::WHOLE, &Silent, &search::NoCheckpoint).unwrap()]).unwrap();
        // Every kept set is either ranked or reported as undetermined (its gain within
        // round-off, as on a network without work labels, whose bound is exactly zero).
        prop_assert!(!outcome.designs.is_empty() || outcome.undetermined > 0);
        for d in &outcome.designs {
            let (power, roundoff) = d.verified.unwrap();
            prop_assert!(power <= b.certified_upper + roundoff + 1e-9 * b.certified_upper.abs(),
                "design {power} above the certified bound {}", b.certified_upper);
            for pw in d.pathways(&net) {
                prop_assert!(pw.forward <= 10f64.powf(cap) * (1.0 + 1e-9) && pw.backward <= 10f64.powf(cap) * (1.0 + 1e-9));
            }
        }
    }
}
