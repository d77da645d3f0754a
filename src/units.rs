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

    /// Nanoseconds in one of this unit (an exact integer).
    pub fn nanoseconds(self) -> u64 {
        match self {
            Self::Second => 1_000_000_000,
            Self::Millisecond => 1_000_000,
            Self::Microsecond => 1_000,
            Self::Nanosecond => 1,
            Self::Minute => 60_000_000_000,
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

/// Why a budget value written with a unit could not be read.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum QuantityError {
    #[error("'{0}' does not start with a number")]
    NoNumber(String),
    #[error("'{text}': unknown unit '{unit}'; write {expected}")]
    UnknownUnit {
        text: String,
        unit: String,
        expected: String,
    },
}

/// A rate as a user wrote it: a bare number (per the model's own time unit) or a number per a
/// named time unit (`1000/s`, `5 /ms`, `2 per us`).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct GivenRate {
    pub value: f64,
    /// `None`: the model's own time unit.
    pub per: Option<TimeUnit>,
}

impl GivenRate {
    /// A bare number, read in the model's own time unit.
    pub fn bare(value: f64) -> Self {
        Self { value, per: None }
    }

    /// The rate per the time unit of `units`, correctly rounded: the ratio of two accepted time
    /// units is an integer (in nanoseconds), so one multiplication or division by it is the
    /// only rounding.
    pub fn in_units(self, units: &Units) -> f64 {
        let Some(per) = self.per else {
            return self.value;
        };
        let (model, given) = (units.time.nanoseconds(), per.nanoseconds());
        if model >= given {
            self.value * (model / given) as f64
        } else {
            self.value / (given / model) as f64
        }
    }
}

impl std::str::FromStr for GivenRate {
    type Err = QuantityError;

    fn from_str(text: &str) -> Result<Self, Self::Err> {
        let (value, rest) = leading_number(text)?;
        let unit = rest
            .strip_prefix('/')
            .or_else(|| rest.strip_prefix("per "))
            .map(str::trim);
        let per = match unit {
            None if rest.is_empty() => None,
            Some(name) => Some(TimeUnit::parse(name).ok_or_else(|| unknown(text, name, rates()))?),
            None => return Err(unknown(text, rest, rates())),
        };
        Ok(Self { value, per })
    }
}

/// An energy as a user wrote it: a bare number (in the model's own energy unit) or a number
/// with a named unit (`10kJ/mol`, `4 kT`, `12 pN nm`).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct GivenEnergy {
    pub value: f64,
    /// `None`: the model's own energy unit.
    pub unit: Option<EnergyUnit>,
}

impl GivenEnergy {
    /// A bare number, read in the model's own energy unit.
    pub fn bare(value: f64) -> Self {
        Self { value, unit: None }
    }

    /// The energy in kT at the temperature of `units` (a `kT` value is the model's own kT).
    pub fn to_kt(self, units: &Units) -> f64 {
        match self.unit {
            None => units.to_kt(self.value),
            Some(unit) => units_in(unit, units).to_kt(self.value),
        }
    }
}

impl std::str::FromStr for GivenEnergy {
    type Err = QuantityError;

    fn from_str(text: &str) -> Result<Self, Self::Err> {
        let (value, rest) = leading_number(text)?;
        let unit = match rest {
            "" => None,
            name => Some(EnergyUnit::parse(name).ok_or_else(|| {
                unknown(
                    text,
                    name,
                    format!("one of {}", EnergyUnit::NAMES.join(", ")),
                )
            })?),
        };
        Ok(Self { value, unit })
    }
}

/// The same temperature and time unit with another energy unit.
fn units_in(energy: EnergyUnit, units: &Units) -> Units {
    Units { energy, ..*units }
}

/// The longest prefix of `text` (after spaces) that reads as a number, and the trimmed rest.
fn leading_number(text: &str) -> Result<(f64, &str), QuantityError> {
    let text_trimmed = text.trim();
    (1..=text_trimmed.len())
        .rev()
        .filter(|&end| text_trimmed.is_char_boundary(end))
        .find_map(|end| {
            let value = text_trimmed[..end].parse::<f64>().ok()?;
            // The longest prefix wins: "1e3/ms" reads 1e3, and "10eV" reads 10 ("10e" is no
            // number).
            Some((value, text_trimmed[end..].trim()))
        })
        .ok_or_else(|| QuantityError::NoNumber(text.to_string()))
}

fn unknown(text: &str, unit: &str, expected: String) -> QuantityError {
    QuantityError::UnknownUnit {
        text: text.to_string(),
        unit: unit.to_string(),
        expected,
    }
}

fn rates() -> String {
    format!(
        "a number, or a number per one of {} (e.g. 1000/s)",
        TimeUnit::NAMES.join(", ")
    )
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

    #[test]
    fn budget_values_carry_their_units() {
        let ms = Units {
            time: TimeUnit::Millisecond,
            ..Units::default()
        };
        let rate = |text: &str| text.parse::<GivenRate>().unwrap().in_units(&ms);
        // 1000 per second is 1 per millisecond; a bare number is already per ms.
        assert_eq!(rate("1000/s"), 1.0);
        assert_eq!(rate("1000 /s"), 1.0);
        assert_eq!(rate("2 per us"), 2000.0);
        assert_eq!(rate("1e3/ms"), 1000.0);
        assert_eq!(rate("1000"), 1000.0);
        assert_eq!(rate("1/min"), 1e-3 / 60.0);
        // 10 kJ/mol at 298.15 K in kT: 1e4 / (N_A k_B T), from the exact 2019 SI values typed
        // here (k_B = 1.380649e-23 J/K, N_A = 6.02214076e23 /mol).
        let kt = |text: &str| text.parse::<GivenEnergy>().unwrap().to_kt(&ms);
        let expected = 1e4 / (6.02214076e23 * 1.380649e-23 * 298.15);
        assert!((kt("10kJ/mol") - expected).abs() <= 2.0 * f64::EPSILON * expected);
        assert!((kt("12 pN nm") - 12e-21 / (1.380649e-23 * 298.15)).abs() < 1e-14);
        assert_eq!(kt("4kT"), 4.0);
        assert_eq!(kt("4"), 4.0); // the model's own unit, kT here
        let ev = 10.0 * 1.602176634e-19 / (1.380649e-23 * 298.15);
        assert!((kt("10eV") - ev).abs() <= 2.0 * f64::EPSILON * ev);
        for bad in ["fast", "/s", ""] {
            assert!(matches!(
                bad.parse::<GivenRate>(),
                Err(QuantityError::NoNumber(_))
            ));
        }
        for bad in ["1000 Hz", "5/hour", "5 s"] {
            let err = bad.parse::<GivenRate>().unwrap_err().to_string();
            assert!(err.contains("1000/s"), "{bad}: {err}");
        }
        let err = "10 kj/mol".parse::<GivenEnergy>().unwrap_err().to_string();
        assert!(
            err.contains("unknown unit 'kj/mol'") && err.contains("kJ/mol"),
            "{err}"
        );
    }
}
