//! Physical units and exact SI constants.
//!
//! Owns the conversion between the units a model file is written in and the internal units used
//! by every computation: energies in kT (k_B times the bath temperature) and rates in the model's
//! own time unit. It does no I/O and knows nothing about networks.
//!
//! Constants are the exact values fixed by the 2019 revision of the SI (CODATA 2018).

/// Boltzmann constant, J/K (exact).
pub const BOLTZMANN: f64 = 1.380649e-23;
/// Avogadro constant, 1/mol (exact).
pub const AVOGADRO: f64 = 6.02214076e23;
/// Elementary charge, C (exact); also joules per electronvolt.
pub const ELEMENTARY_CHARGE: f64 = 1.602176634e-19;
/// Planck constant, J s (exact).
pub const PLANCK: f64 = 6.62607015e-34;
/// Speed of light in vacuum, m/s (exact).
pub const SPEED_OF_LIGHT: f64 = 299792458.0;
/// Calories per joule: the thermochemical calorie is exactly 4.184 J.
pub const JOULES_PER_CALORIE: f64 = 4.184;

/// Energy units accepted in model files.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum EnergyUnit {
    KT,
    KiloJoulePerMole,
    KiloCaloriePerMole,
    ElectronVolt,
    ZeptoJoule,
    PiconewtonNanometre,
}

impl EnergyUnit {
    /// Every accepted spelling, in the order shown in error messages.
    pub const NAMES: [&'static str; 6] = ["kT", "kJ/mol", "kcal/mol", "eV", "zJ", "pN nm"];

    /// Parses the spelling used in model files (exact match).
    pub fn parse(text: &str) -> Option<Self> {
        Some(match text {
            "kT" => Self::KT,
            "kJ/mol" => Self::KiloJoulePerMole,
            "kcal/mol" => Self::KiloCaloriePerMole,
            "eV" => Self::ElectronVolt,
            "zJ" => Self::ZeptoJoule,
            "pN nm" => Self::PiconewtonNanometre,
            _ => return None,
        })
    }

    /// The spelling used in model files and reports.
    pub fn name(self) -> &'static str {
        match self {
            Self::KT => "kT",
            Self::KiloJoulePerMole => "kJ/mol",
            Self::KiloCaloriePerMole => "kcal/mol",
            Self::ElectronVolt => "eV",
            Self::ZeptoJoule => "zJ",
            Self::PiconewtonNanometre => "pN nm",
        }
    }

    /// Joules per molecule carried by one of this unit at `temperature` kelvin.
    pub fn joules(self, temperature: f64) -> f64 {
        match self {
            Self::KT => BOLTZMANN * temperature,
            Self::KiloJoulePerMole => 1e3 / AVOGADRO,
            Self::KiloCaloriePerMole => 1e3 * JOULES_PER_CALORIE / AVOGADRO,
            Self::ElectronVolt => ELEMENTARY_CHARGE,
            Self::ZeptoJoule | Self::PiconewtonNanometre => 1e-21,
        }
    }
}

/// Time units accepted in model files.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum TimeUnit {
    Second,
    Millisecond,
    Microsecond,
    Nanosecond,
    Minute,
}

impl TimeUnit {
    /// Every accepted spelling, in the order shown in error messages.
    pub const NAMES: [&'static str; 5] = ["s", "ms", "us", "ns", "min"];

    /// Parses the spelling used in model files (exact match).
    pub fn parse(text: &str) -> Option<Self> {
        Some(match text {
            "s" => Self::Second,
            "ms" => Self::Millisecond,
            "us" => Self::Microsecond,
            "ns" => Self::Nanosecond,
            "min" => Self::Minute,
            _ => return None,
        })
    }

    /// The spelling used in model files and reports.
    pub fn name(self) -> &'static str {
        match self {
            Self::Second => "s",
            Self::Millisecond => "ms",
            Self::Microsecond => "us",
            Self::Nanosecond => "ns",
            Self::Minute => "min",
        }
    }

    /// Seconds in one of this unit.
    pub fn seconds(self) -> f64 {
        match self {
            Self::Second => 1.0,
            Self::Millisecond => 1e-3,
            Self::Microsecond => 1e-6,
            Self::Nanosecond => 1e-9,
            Self::Minute => 60.0,
        }
    }
}

/// The unit system of one model: bath temperature, energy unit and time unit.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Units {
    /// Bath temperature in kelvin.
    pub temperature: f64,
    pub energy: EnergyUnit,
    pub time: TimeUnit,
}

impl Default for Units {
    fn default() -> Self {
        Self {
            temperature: 298.15,
            energy: EnergyUnit::KT,
            time: TimeUnit::Second,
        }
    }
}

impl Units {
    /// Thermal energy k_B T in joules.
    pub fn kt_joules(&self) -> f64 {
        BOLTZMANN * self.temperature
    }

    /// How many kT one model energy unit is worth.
    pub fn kt_per_unit(&self) -> f64 {
        self.energy.joules(self.temperature) / self.kt_joules()
    }

    /// Converts an energy from the model's unit to kT.
    pub fn to_kt(&self, energy: f64) -> f64 {
        match self.energy {
            EnergyUnit::KT => energy,
            _ => energy * self.kt_per_unit(),
        }
    }

    /// Converts an energy (or a power, per model time unit) from kT to the model's unit.
    pub fn from_kt(&self, energy_kt: f64) -> f64 {
        match self.energy {
            EnergyUnit::KT => energy_kt,
            _ => energy_kt / self.kt_per_unit(),
        }
    }

    /// Converts a power in kT per model time unit to watts per molecule.
    pub fn watts(&self, power_kt: f64) -> f64 {
        power_kt * self.kt_joules() / self.time.seconds()
    }

    /// Label for powers, e.g. `kT/s` or `kJ/mol/ms`.
    pub fn power_label(&self) -> String {
        format!("{}/{}", self.energy.name(), self.time.name())
    }
}

/// Energy of one photon of the given vacuum wavelength (nm), in joules: `h c / lambda`.
pub fn photon_energy_joules(wavelength_nm: f64) -> f64 {
    PLANCK * SPEED_OF_LIGHT / (wavelength_nm * 1e-9)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn round_trip_every_energy_unit() {
        for name in EnergyUnit::NAMES {
            let energy = EnergyUnit::parse(name).unwrap();
            assert_eq!(energy.name(), name);
            let units = Units {
                energy,
                temperature: 310.0,
                time: TimeUnit::Second,
            };
            let x = 3.7;
            assert!((units.from_kt(units.to_kt(x)) - x).abs() < 1e-14);
        }
        for name in TimeUnit::NAMES {
            assert_eq!(TimeUnit::parse(name).unwrap().name(), name);
        }
        assert!(EnergyUnit::parse("kj/mol").is_none());
    }
}
