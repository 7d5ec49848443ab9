//! What the user says about the cell and the electrode, in SI, with standard uncertainties.

use serde::Serialize;

/// A value with its standard uncertainty (GUM: JCGM 100:2008), in the unit its field names.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Measured {
    /// The value.
    pub value: f64,
    /// Its standard uncertainty (0 when exact or unknown).
    pub u: f64,
}

impl Measured {
    /// A value taken as exact.
    pub fn exact(value: f64) -> Measured {
        Measured { value, u: 0.0 }
    }

    /// A value with a standard uncertainty.
    pub fn new(value: f64, u: f64) -> Measured {
        Measured { value, u }
    }

    /// Relative standard uncertainty u/|value|.
    pub fn relative(&self) -> f64 {
        if self.value == 0.0 {
            f64::INFINITY
        } else {
            self.u / self.value.abs()
        }
    }
}

/// The shape of the electrode.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Default)]
#[serde(rename_all = "snake_case")]
pub enum Geometry {
    /// A plane (a macro disk when diffusion to its edge is negligible).
    #[default]
    Planar,
    /// A disk of radius r in an insulating plane.
    Microdisk,
    /// A whole sphere of radius r0.
    Sphere,
    /// A hemisphere of radius r0 on an insulating plane.
    Hemisphere,
}

impl Geometry {
    /// Lowercase name.
    pub fn name(self) -> &'static str {
        match self {
            Geometry::Planar => "planar",
            Geometry::Microdisk => "microdisk",
            Geometry::Sphere => "sphere",
            Geometry::Hemisphere => "hemisphere",
        }
    }
}

/// The cell as entered.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Cell {
    /// Electrons transferred per molecule (exact).
    pub n: f64,
    /// Electrode geometry.
    pub geometry: Geometry,
    /// Electroactive area in m², if given.
    pub area_m2: Option<Measured>,
    /// Radius in m (disk, sphere or hemisphere), if given.
    pub radius_m: Option<Measured>,
    /// Bulk concentration in mol/m³ (numerically equal to mM), if given.
    pub conc_mol_m3: Option<Measured>,
    /// A known diffusion coefficient in m²/s: switches to the inverse problem (n·A·C).
    pub known_d_m2_s: Option<Measured>,
    /// Temperature in K, for the record only.
    pub temperature_k: Option<f64>,
}

impl Default for Cell {
    fn default() -> Self {
        Cell {
            n: 1.0,
            geometry: Geometry::Planar,
            area_m2: None,
            radius_m: None,
            conc_mol_m3: None,
            known_d_m2_s: None,
            temperature_k: None,
        }
    }
}

impl Cell {
    /// The area the planar fit uses: as given, else from the radius (disk πr², sphere 4πr²,
    /// hemisphere 2πr²), with the uncertainty propagated (u_A/A = 2·u_r/r).
    pub fn effective_area_m2(&self) -> Option<Measured> {
        if let Some(a) = self.area_m2 {
            return Some(a);
        }
        let r = self.radius_m?;
        let factor = match self.geometry {
            Geometry::Planar | Geometry::Microdisk => std::f64::consts::PI,
            Geometry::Sphere => 4.0 * std::f64::consts::PI,
            Geometry::Hemisphere => 2.0 * std::f64::consts::PI,
        };
        let a = factor * r.value * r.value;
        Some(Measured::new(a, 2.0 * a * r.relative()))
    }

    /// A length scale for the edge of a disk: the radius as given, else √(A/π).
    pub fn disk_radius_m(&self) -> Option<f64> {
        self.radius_m.map(|r| r.value).or_else(|| {
            self.area_m2
                .map(|a| (a.value / std::f64::consts::PI).sqrt())
        })
    }

    /// Checks the entries for impossible values and says what is wrong.
    pub fn validate(&self) -> Result<(), String> {
        if !(self.n > 0.0 && self.n.is_finite()) {
            return Err(format!(
                "n must be a positive number of electrons, not {}",
                self.n
            ));
        }
        let checks = [
            ("area", self.area_m2),
            ("radius", self.radius_m),
            ("concentration", self.conc_mol_m3),
            ("known diffusion coefficient", self.known_d_m2_s),
        ];
        for (name, m) in checks {
            if let Some(m) = m {
                if !(m.value > 0.0 && m.value.is_finite()) {
                    return Err(format!("the {name} must be positive, not {}", m.value));
                }
                if !(m.u >= 0.0 && m.u.is_finite()) {
                    return Err(format!(
                        "the uncertainty of the {name} must be zero or positive"
                    ));
                }
            }
        }
        if let Some(t) = self.temperature_k
            && !(t > 0.0 && t.is_finite())
        {
            return Err(format!(
                "the temperature must be positive in kelvin, not {t}"
            ));
        }
        Ok(())
    }
}
