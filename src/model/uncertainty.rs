//! Parameter uncertainty of a model and the sampling of networks from it (methods, section 14).
//!
//! Owns the spread of each uncertain parameter as the model file gives it (`rate_uncertainty`,
//! a multiplicative factor at 95%; `energy_uncertainty`, a half-width at 95% in the energy
//! unit) and `sample`, which draws one network: log-normal forward rates, normal state energies
//! and drives, each backward rate derived by local detailed balance, so every sample obeys LDB
//! exactly. A transition copied into several environment states, and a state's copies in the
//! joint chain, share one draw. It never solves anything and reads no file.

use super::{Channel, Network};
use crate::rng::SplitMix;

/// The standard normal quantile of 0.975: a 95% two-sided interval is `mean +- 1.959964 sd`.
pub const Z_95: f64 = 1.959_963_984_540_054;

/// The spread of every uncertain parameter (standard deviations; energies in kT).
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Uncertainty {
    /// Per system state: standard deviation of its energy (kT).
    pub energy_sd: Vec<f64>,
    /// Per file transition: standard deviation of the log of its forward rate.
    pub ln_rate_sd: Vec<f64>,
    /// Per file transition: standard deviation of its drive (kT).
    pub drive_sd: Vec<f64>,
    /// Per network channel: the file transition it copies (`None` for environment switches,
    /// which are not sampled).
    pub channel_transition: Vec<Option<usize>>,
    /// Per network state: the system state it is a copy of.
    pub state_system: Vec<usize>,
}

/// One draw of standard normal numbers for every uncertain parameter.
struct Draw {
    energy: Vec<f64>,
    rate: Vec<f64>,
    drive: Vec<f64>,
}

impl Uncertainty {
    /// Whether any parameter is uncertain at all.
    pub fn is_any(&self) -> bool {
        self.energy_sd
            .iter()
            .chain(&self.ln_rate_sd)
            .chain(&self.drive_sd)
            .any(|&s| s > 0.0)
    }

    /// How many parameters are sampled.
    pub fn sampled_count(&self) -> usize {
        self.energy_sd
            .iter()
            .chain(&self.ln_rate_sd)
            .chain(&self.drive_sd)
            .filter(|&&s| s > 0.0)
            .count()
    }

    fn draw(&self, rng: &mut SplitMix) -> Draw {
        let mut normals = |sds: &[f64]| -> Vec<f64> {
            sds.iter()
                .map(|&sd| if sd > 0.0 { sd * normal(rng) } else { 0.0 })
                .collect()
        };
        Draw {
            energy: normals(&self.energy_sd),
            rate: normals(&self.ln_rate_sd),
            drive: normals(&self.drive_sd),
        }
    }

    /// Sample `index` of the stream `seed`: every sample has its own generator, so a sample
    /// never depends on threads or on which samples ran before. `None` when a derived backward
    /// rate leaves the double range.
    pub fn sample(&self, network: &Network, seed: u64, index: u64) -> Option<Network> {
        let mut rng = SplitMix::new(stream_seed(seed, index));
        let draw = self.draw(&mut rng);
        let energies: Vec<f64> = network
            .energies
            .iter()
            .zip(&self.state_system)
            .map(|(e, &s)| e + draw.energy[s])
            .collect();
        let channels = network
            .channels
            .iter()
            .zip(&self.channel_transition)
            .map(|(c, t)| match t {
                None => *c,
                Some(t) => Channel::balanced(
                    &energies,
                    c.from,
                    c.to,
                    c.forward * draw.rate[*t].exp(),
                    c.work,
                    c.drive + draw.drive[*t],
                ),
            })
            .collect::<Vec<_>>();
        let valid = channels
            .iter()
            .all(|c| c.forward.is_normal() && c.backward.is_normal());
        valid.then_some(Network { energies, channels })
    }
}

/// The seed of sample `index`: SplitMix64 output of the pair, so neighbouring samples are
/// uncorrelated.
fn stream_seed(seed: u64, index: u64) -> u64 {
    let mut mix = SplitMix::new(seed ^ index.wrapping_mul(0xd1b5_4a32_d192_ed03));
    mix.next_u64()
}

/// A standard normal number (Box-Muller; G. E. P. Box and M. E. Muller, Ann. Math. Statist.
/// 29, 610, 1958), from two uniforms in (0, 1].
pub fn normal(rng: &mut SplitMix) -> f64 {
    let u = 1.0 - rng.uniform();
    let v = rng.uniform();
    (-2.0 * u.ln()).sqrt() * (std::f64::consts::TAU * v).cos()
}

/// The standard deviation of `ln k` for a multiplicative factor `factor` at 95%.
pub fn ln_rate_sd(factor: f64) -> f64 {
    factor.ln() / Z_95
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn normal_numbers_have_unit_variance_and_the_95_percent_share() {
        let mut rng = SplitMix::new(7);
        let n = 200_000;
        let xs: Vec<f64> = (0..n).map(|_| normal(&mut rng)).collect();
        let mean = xs.iter().sum::<f64>() / n as f64;
        let var = xs.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (n - 1) as f64;
        let inside = xs.iter().filter(|x| x.abs() <= Z_95).count() as f64 / n as f64;
        // Standard errors: mean 1/sqrt(n) = 0.0022, variance sqrt(2/n) = 0.0032, share
        // sqrt(0.95 * 0.05 / n) = 0.0005; the bounds are about 4 of them.
        assert!(mean.abs() < 0.01, "{mean}");
        assert!((var - 1.0).abs() < 0.013, "{var}");
        assert!((inside - 0.95).abs() < 0.002, "{inside}");
    }
}
