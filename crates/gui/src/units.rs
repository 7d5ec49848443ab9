//! The units a user can type quantities in. Inside the program everything is SI; these convert
//! at the edge, where the number is typed.

/// A unit the user can pick from a list, with its factor to SI.
pub trait UnitChoice: Copy + PartialEq + 'static {
    /// Every choice, in the order the list shows them.
    const ALL: &'static [Self];
    /// How it is written.
    fn symbol(self) -> &'static str;
    /// Multiply a value in this unit by this to get SI.
    fn to_si(self) -> f64;
}

/// Units of area.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum AreaUnit {
    /// cm².
    #[default]
    Cm2,
    /// mm².
    Mm2,
    /// µm².
    Um2,
    /// m².
    M2,
}

impl UnitChoice for AreaUnit {
    const ALL: &'static [Self] = &[AreaUnit::Cm2, AreaUnit::Mm2, AreaUnit::Um2, AreaUnit::M2];
    fn symbol(self) -> &'static str {
        match self {
            AreaUnit::Cm2 => "cm²",
            AreaUnit::Mm2 => "mm²",
            AreaUnit::Um2 => "µm²",
            AreaUnit::M2 => "m²",
        }
    }
    fn to_si(self) -> f64 {
        match self {
            AreaUnit::Cm2 => 1e-4,
            AreaUnit::Mm2 => 1e-6,
            AreaUnit::Um2 => 1e-12,
            AreaUnit::M2 => 1.0,
        }
    }
}

/// Units of length (radius or diameter).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum LengthUnit {
    /// µm.
    Um,
    /// mm.
    #[default]
    Mm,
    /// cm.
    Cm,
    /// m.
    M,
}

impl UnitChoice for LengthUnit {
    const ALL: &'static [Self] = &[
        LengthUnit::Um,
        LengthUnit::Mm,
        LengthUnit::Cm,
        LengthUnit::M,
    ];
    fn symbol(self) -> &'static str {
        match self {
            LengthUnit::Um => "µm",
            LengthUnit::Mm => "mm",
            LengthUnit::Cm => "cm",
            LengthUnit::M => "m",
        }
    }
    fn to_si(self) -> f64 {
        match self {
            LengthUnit::Um => 1e-6,
            LengthUnit::Mm => 1e-3,
            LengthUnit::Cm => 1e-2,
            LengthUnit::M => 1.0,
        }
    }
}

/// Units of concentration.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum ConcUnit {
    /// mmol/L, numerically mol/m³.
    #[default]
    MilliMolar,
    /// µmol/L.
    MicroMolar,
    /// mol/L.
    Molar,
    /// mol/cm³.
    MolPerCm3,
}

impl UnitChoice for ConcUnit {
    const ALL: &'static [Self] = &[
        ConcUnit::MilliMolar,
        ConcUnit::MicroMolar,
        ConcUnit::Molar,
        ConcUnit::MolPerCm3,
    ];
    fn symbol(self) -> &'static str {
        match self {
            ConcUnit::MilliMolar => "mM",
            ConcUnit::MicroMolar => "µM",
            ConcUnit::Molar => "M",
            ConcUnit::MolPerCm3 => "mol/cm³",
        }
    }
    fn to_si(self) -> f64 {
        // mol/m³: 1 mM = 1 mol/m³, 1 mol/cm³ = 10⁶ mol/m³.
        match self {
            ConcUnit::MilliMolar => 1.0,
            ConcUnit::MicroMolar => 1e-3,
            ConcUnit::Molar => 1e3,
            ConcUnit::MolPerCm3 => 1e6,
        }
    }
}

/// Units of a diffusion coefficient.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum DiffusionUnit {
    /// cm²/s, the unit of the trade.
    #[default]
    Cm2PerS,
    /// m²/s.
    M2PerS,
}

impl UnitChoice for DiffusionUnit {
    const ALL: &'static [Self] = &[DiffusionUnit::Cm2PerS, DiffusionUnit::M2PerS];
    fn symbol(self) -> &'static str {
        match self {
            DiffusionUnit::Cm2PerS => "cm²/s",
            DiffusionUnit::M2PerS => "m²/s",
        }
    }
    fn to_si(self) -> f64 {
        match self {
            DiffusionUnit::Cm2PerS => 1e-4,
            DiffusionUnit::M2PerS => 1.0,
        }
    }
}

/// Units of temperature (an offset scale, so not a [`UnitChoice`]).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum TemperatureUnit {
    /// Degrees Celsius.
    #[default]
    Celsius,
    /// Kelvin.
    Kelvin,
}

impl TemperatureUnit {
    /// How it is written.
    pub fn symbol(self) -> &'static str {
        match self {
            TemperatureUnit::Celsius => "°C",
            TemperatureUnit::Kelvin => "K",
        }
    }

    /// A value in this unit in kelvin (0 °C = 273.15 K exactly, by the definition of the scale).
    pub fn to_kelvin(self, value: f64) -> f64 {
        match self {
            TemperatureUnit::Celsius => value + 273.15,
            TemperatureUnit::Kelvin => value,
        }
    }
}

/// Whether an uncertainty is typed relative to its value or in the value's unit.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum UncertaintyMode {
    /// Percent of the value.
    #[default]
    Percent,
    /// In the value's unit.
    Absolute,
}
