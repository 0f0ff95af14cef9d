//! Material presets for the carrier analyses: band-edge effective densities of states, the
//! band gap's temperature dependence, permittivity, effective masses and lattice mobilities.
//!
//! # What a preset holds
//!
//! - Nc and Nv at 300 K, scaled as T^1.5 (parabolic bands with temperature-independent
//!   masses: for GaAs and InP, whose conduction band is non-parabolic and has higher valleys,
//!   this is an approximation that holds best below room temperature).
//! - Varshni's relation Eg(T) = Eg(0) - alpha T^2 / (T + beta) (Varshni, Physica 34, 149,
//!   1967) with the handbook parameters.
//! - The static relative permittivity.
//! - Conductivity effective masses (what mobility and ionized-impurity scattering see):
//!   for electrons in several equivalent ellipsoidal valleys 3 / (1/m_l + 2/m_t); for holes
//!   in heavy and light bands (m_h^1.5 + m_l^1.5) / (m_h^0.5 + m_l^0.5), the average of
//!   1/m weighted by each band's share of the holes. The density-of-states masses are not
//!   stored: they follow from Nc and Nv ([`Material::electron_dos_mass_ratio`]), so the two
//!   can never disagree.
//! - Lattice-limited mobilities mu_300 (T / 300 K)^-exponent where a law could be sourced.
//!
//! # Sources
//!
//! Silicon's Nc, Nv and Varshni parameters were read in the source named beside them
//! (Levinshtein, Rumyantsev and Shur, Handbook Series on Semiconductor Parameters, vol. 1,
//! 1996); its lattice mobility laws take their exponents from Arora, Hauser and Roulston
//! (IEEE Trans. Electron Devices 29, 292, 1982) and are checked against the measured lattice
//! mobility of Jacoboni et al. (1977), and the intrinsic density the bands imply against
//! Sproul and Green (1991) and Misiakos and Tsamakis (1993): 13 % below the measured value
//! at 300 K (`scattering/validation.rs`). Every other number is recalled from the same handbook series
//! (vol. 1 for Ge, GaAs, InP; vol. 2 for GaN and SiC, as tabulated in the Ioffe institute's
//! online archive of it) and says "from memory" beside it: check it against the handbook
//! before relying on it, and override it where the lab has better values. Every field is
//! public and [`MaterialOverrides`] replaces any of them.

use crate::carrier_type::CarrierType;
use mobilis_physics::constants::{BOLTZMANN_J_PER_K, ELECTRON_MASS_KG, PLANCK_J_S};
use mobilis_physics::forward::statistics::{BandModel, DOS_REFERENCE_TEMPERATURE_K};

/// cm^-3 to m^-3.
const PER_CM3: f64 = 1e6;
/// cm^2/(V s) to m^2/(V s).
const CM2_PER_VS: f64 = 1e-4;

/// (300 K)^1.5, to turn a handbook "A T^1.5 cm^-3" into the value at 300 K.
fn at_300k(prefactor_cm3_per_k1p5: f64) -> f64 {
    let t = DOS_REFERENCE_TEMPERATURE_K;
    prefactor_cm3_per_k1p5 * t * t.sqrt() * PER_CM3
}

/// A lattice-limited (phonon) mobility law mu_300 (T / 300 K)^-exponent.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LatticeMobility {
    /// Mobility at 300 K, m^2/(V s).
    pub mobility_300k_m2_per_vs: f64,
    /// The exponent alpha of T^-alpha.
    pub exponent: f64,
}

/// A semiconductor as the carrier analyses see it. SI units; every field may be replaced.
#[derive(Debug, Clone, PartialEq)]
pub struct Material {
    /// The preset name ("Si", "Ge", ...) or a name of the user's choosing.
    pub name: String,
    /// Conduction-band effective density of states at 300 K, m^-3 (scaled as T^1.5).
    pub conduction_dos_300k_m3: f64,
    /// Valence-band effective density of states at 300 K, m^-3 (scaled as T^1.5).
    pub valence_dos_300k_m3: f64,
    /// Varshni Eg(0), eV.
    pub band_gap_0k_ev: f64,
    /// Varshni alpha, eV/K.
    pub varshni_alpha_ev_per_k: f64,
    /// Varshni beta, K.
    pub varshni_beta_k: f64,
    /// Static relative permittivity.
    pub relative_permittivity: f64,
    /// Electron conductivity effective mass over m0.
    pub electron_conductivity_mass_ratio: f64,
    /// Hole conductivity effective mass over m0.
    pub hole_conductivity_mass_ratio: f64,
    /// Lattice-limited electron mobility, when known.
    pub electron_lattice_mobility: Option<LatticeMobility>,
    /// Lattice-limited hole mobility, when known.
    pub hole_lattice_mobility: Option<LatticeMobility>,
}

/// The preset names [`Material::preset`] accepts (case-insensitively).
pub const PRESET_NAMES: [&str; 6] = ["Si", "Ge", "GaAs", "InP", "GaN", "4H-SiC"];

/// The material presets, as parameters name them: one variant per [`PRESET_NAMES`] entry,
/// with the same wire name.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, serde::Serialize, serde::Deserialize, schemars::JsonSchema)]
pub enum MaterialPreset {
    /// silicon
    #[default]
    #[serde(rename = "Si")]
    Silicon,
    /// germanium
    #[serde(rename = "Ge")]
    Germanium,
    /// gallium arsenide
    #[serde(rename = "GaAs")]
    GalliumArsenide,
    /// indium phosphide
    #[serde(rename = "InP")]
    IndiumPhosphide,
    /// wurtzite gallium nitride
    #[serde(rename = "GaN")]
    GalliumNitride,
    /// 4H silicon carbide
    #[serde(rename = "4H-SiC")]
    SiliconCarbide4H,
}

impl MaterialPreset {
    /// Every preset, in the order of [`PRESET_NAMES`].
    pub const ALL: [MaterialPreset; 6] = [
        MaterialPreset::Silicon,
        MaterialPreset::Germanium,
        MaterialPreset::GalliumArsenide,
        MaterialPreset::IndiumPhosphide,
        MaterialPreset::GalliumNitride,
        MaterialPreset::SiliconCarbide4H,
    ];

    /// The wire name ("Si", "4H-SiC", ...).
    pub fn name(self) -> &'static str {
        match self {
            MaterialPreset::Silicon => "Si",
            MaterialPreset::Germanium => "Ge",
            MaterialPreset::GalliumArsenide => "GaAs",
            MaterialPreset::IndiumPhosphide => "InP",
            MaterialPreset::GalliumNitride => "GaN",
            MaterialPreset::SiliconCarbide4H => "4H-SiC",
        }
    }

    /// The preset's constants.
    pub fn material(self) -> Material {
        match self {
            MaterialPreset::Silicon => Material::silicon(),
            MaterialPreset::Germanium => Material::germanium(),
            MaterialPreset::GalliumArsenide => Material::gallium_arsenide(),
            MaterialPreset::IndiumPhosphide => Material::indium_phosphide(),
            MaterialPreset::GalliumNitride => Material::gallium_nitride(),
            MaterialPreset::SiliconCarbide4H => Material::silicon_carbide_4h(),
        }
    }
}

impl Material {
    /// Silicon.
    pub fn silicon() -> Self {
        Material {
            name: "Si".into(),
            // Levinshtein, Rumyantsev and Shur, vol. 1: Nc = 6.2e15 T^1.5, Nv = 3.5e15 T^1.5
            // cm^-3 (3.22e19 and 1.82e19 at 300 K), the values core's BandModel::silicon
            // uses. Green (J. Appl. Phys. 67, 2944, 1990) gives 2.86e19 and 3.10e19: choose
            // them through the overrides.
            conduction_dos_300k_m3: BandModel::silicon().conduction_dos_300k_m3,
            valence_dos_300k_m3: BandModel::silicon().valence_dos_300k_m3,
            // Levinshtein, Rumyantsev and Shur, vol. 1: Eg = 1.17 - 4.73e-4 T^2 / (T + 636) eV.
            band_gap_0k_ev: 1.17,
            varshni_alpha_ev_per_k: 4.73e-4,
            varshni_beta_k: 636.0,
            // From memory: 11.7, the common handbook value.
            relative_permittivity: 11.7,
            // From memory: 3 / (1/0.98 + 2/0.19) = 0.26 from the longitudinal and transverse
            // masses 0.98 and 0.19.
            electron_conductivity_mass_ratio: 0.26,
            // From memory: heavy 0.49 and light 0.16 hole masses give 0.37.
            hole_conductivity_mass_ratio: 0.37,
            // 1448 (T/300)^-2.33 and 473 (T/300)^-2.23 cm^2/(V s): the exponents are those of
            // the lattice terms of Arora, Hauser and Roulston (1982); the 300 K values are
            // recalled from memory (Arora's own low-doping limits at 300 K are 1340 and 461,
            // which include residual impurity scattering). Within 11 % of the measured
            // lattice mobility of Jacoboni et al. (Solid-State Electron. 20, 77, 1977) from 77
            // to 400 K (scattering/validation.rs).
            electron_lattice_mobility: Some(LatticeMobility {
                mobility_300k_m2_per_vs: 1448.0 * CM2_PER_VS,
                exponent: 2.33,
            }),
            hole_lattice_mobility: Some(LatticeMobility {
                mobility_300k_m2_per_vs: 473.0 * CM2_PER_VS,
                exponent: 2.23,
            }),
        }
    }

    /// Germanium. All values from memory of Levinshtein, Rumyantsev and Shur, vol. 1.
    pub fn germanium() -> Self {
        Material {
            name: "Ge".into(),
            // From memory: Nc = 1.98e15 T^1.5, Nv = 9.6e14 T^1.5 cm^-3 (1.0e19, 5.0e18 at 300 K).
            conduction_dos_300k_m3: at_300k(1.98e15),
            valence_dos_300k_m3: at_300k(9.6e14),
            // From memory: Eg = 0.742 - 4.8e-4 T^2 / (T + 235) eV (0.661 eV at 300 K).
            band_gap_0k_ev: 0.742,
            varshni_alpha_ev_per_k: 4.8e-4,
            varshni_beta_k: 235.0,
            // From memory: 16.2.
            relative_permittivity: 16.2,
            // From memory: m_l 1.59, m_t 0.0815 give 3 / (1/1.59 + 2/0.0815) = 0.12.
            electron_conductivity_mass_ratio: 0.12,
            // From memory: heavy 0.33 and light 0.043 hole masses give 0.25.
            hole_conductivity_mass_ratio: 0.25,
            // From memory: about 3900 cm^2/(V s) with T^-1.66 for electrons, 1900 with T^-2.33
            // for holes.
            electron_lattice_mobility: Some(LatticeMobility {
                mobility_300k_m2_per_vs: 3900.0 * CM2_PER_VS,
                exponent: 1.66,
            }),
            hole_lattice_mobility: Some(LatticeMobility {
                mobility_300k_m2_per_vs: 1900.0 * CM2_PER_VS,
                exponent: 2.33,
            }),
        }
    }

    /// Gallium arsenide. All values from memory of Levinshtein, Rumyantsev and Shur, vol. 1.
    pub fn gallium_arsenide() -> Self {
        Material {
            name: "GaAs".into(),
            // From memory: Nc = 4.7e17, Nv = 9.0e18 cm^-3 at 300 K (the handbook's T^1.5 law
            // for Nc carries non-parabolic corrections that are left out here).
            conduction_dos_300k_m3: 4.7e17 * PER_CM3,
            valence_dos_300k_m3: 9.0e18 * PER_CM3,
            // From memory: Eg = 1.519 - 5.405e-4 T^2 / (T + 204) eV (1.422 eV at 300 K).
            band_gap_0k_ev: 1.519,
            varshni_alpha_ev_per_k: 5.405e-4,
            varshni_beta_k: 204.0,
            // From memory: 12.9.
            relative_permittivity: 12.9,
            // From memory: 0.063 (Gamma valley).
            electron_conductivity_mass_ratio: 0.063,
            // From memory: heavy 0.51 and light 0.082 hole masses give 0.39.
            hole_conductivity_mass_ratio: 0.39,
            // Polar-optical scattering does not follow one power law well enough to preset
            // one; give a law through the overrides when needed.
            electron_lattice_mobility: None,
            hole_lattice_mobility: None,
        }
    }

    /// Indium phosphide. All values from memory of Levinshtein, Rumyantsev and Shur, vol. 1.
    pub fn indium_phosphide() -> Self {
        Material {
            name: "InP".into(),
            // From memory: Nc = 5.7e17, Nv = 1.1e19 cm^-3 at 300 K.
            conduction_dos_300k_m3: 5.7e17 * PER_CM3,
            valence_dos_300k_m3: 1.1e19 * PER_CM3,
            // From memory: Eg = 1.421 - 4.9e-4 T^2 / (T + 327) eV (1.351 eV at 300 K).
            band_gap_0k_ev: 1.421,
            varshni_alpha_ev_per_k: 4.9e-4,
            varshni_beta_k: 327.0,
            // From memory: 12.5.
            relative_permittivity: 12.5,
            // From memory: 0.08.
            electron_conductivity_mass_ratio: 0.08,
            // From memory: heavy 0.6 and light 0.089 hole masses give 0.46.
            hole_conductivity_mass_ratio: 0.46,
            electron_lattice_mobility: None,
            hole_lattice_mobility: None,
        }
    }

    /// Wurtzite gallium nitride. All values from memory of Levinshtein, Rumyantsev and Shur,
    /// vol. 2 (Ioffe archive).
    pub fn gallium_nitride() -> Self {
        Material {
            name: "GaN".into(),
            // From memory: Nc = 4.3e14 T^1.5, Nv = 8.9e15 T^1.5 cm^-3 (2.2e18, 4.6e19 at 300 K).
            conduction_dos_300k_m3: at_300k(4.3e14),
            valence_dos_300k_m3: at_300k(8.9e15),
            // From memory: Eg = 3.47 - 7.7e-4 T^2 / (T + 600) eV (3.39 eV at 300 K).
            band_gap_0k_ev: 3.47,
            varshni_alpha_ev_per_k: 7.7e-4,
            varshni_beta_k: 600.0,
            // From memory: 8.9 (static, perpendicular to c).
            relative_permittivity: 8.9,
            // From memory: 0.20.
            electron_conductivity_mass_ratio: 0.20,
            // From memory: heavy 1.4 and light 0.3 hole masses give 1.05.
            hole_conductivity_mass_ratio: 1.05,
            electron_lattice_mobility: None,
            hole_lattice_mobility: None,
        }
    }

    /// 4H silicon carbide. All values from memory of Levinshtein, Rumyantsev and Shur, vol. 2
    /// (Ioffe archive).
    pub fn silicon_carbide_4h() -> Self {
        Material {
            name: "4H-SiC".into(),
            // From memory: Nc = 3.25e15 T^1.5, Nv = 4.8e15 T^1.5 cm^-3 (1.7e19, 2.5e19 at 300 K).
            conduction_dos_300k_m3: at_300k(3.25e15),
            valence_dos_300k_m3: at_300k(4.8e15),
            // From memory: Eg = 3.265 - 6.5e-4 T^2 / (T + 1300) eV (3.23 eV at 300 K).
            band_gap_0k_ev: 3.265,
            varshni_alpha_ev_per_k: 6.5e-4,
            varshni_beta_k: 1300.0,
            // From memory: 9.7 (perpendicular to c).
            relative_permittivity: 9.7,
            // From memory: about 0.37 (anisotropic valleys, m_perp 0.42, m_par 0.29).
            electron_conductivity_mass_ratio: 0.37,
            // From memory: about 1.0.
            hole_conductivity_mass_ratio: 1.0,
            electron_lattice_mobility: None,
            hole_lattice_mobility: None,
        }
    }

    /// The preset called `name` (case-insensitive; "SiC" is taken as 4H-SiC).
    pub fn preset(name: &str) -> Result<Self, MaterialError> {
        match name.trim().to_ascii_lowercase().as_str() {
            "si" | "silicon" => Ok(Material::silicon()),
            "ge" | "germanium" => Ok(Material::germanium()),
            "gaas" => Ok(Material::gallium_arsenide()),
            "inp" => Ok(Material::indium_phosphide()),
            "gan" => Ok(Material::gallium_nitride()),
            "4h-sic" | "sic" | "4h_sic" => Ok(Material::silicon_carbide_4h()),
            _ => Err(MaterialError::UnknownPreset(name.to_string())),
        }
    }

    /// The band model of core's carrier statistics.
    pub fn band_model(&self) -> BandModel {
        BandModel {
            conduction_dos_300k_m3: self.conduction_dos_300k_m3,
            valence_dos_300k_m3: self.valence_dos_300k_m3,
            band_gap_0k_ev: self.band_gap_0k_ev,
            varshni_alpha_ev_per_k: self.varshni_alpha_ev_per_k,
            varshni_beta_k: self.varshni_beta_k,
        }
    }

    /// Electron density-of-states mass over m0, (Nc / Nc(m0))^(2/3) at 300 K.
    pub fn electron_dos_mass_ratio(&self) -> f64 {
        (self.conduction_dos_300k_m3 / effective_dos_for_mass_300k_m3(1.0)).powf(2.0 / 3.0)
    }

    /// Hole density-of-states mass over m0, (Nv / Nc(m0))^(2/3) at 300 K.
    pub fn hole_dos_mass_ratio(&self) -> f64 {
        (self.valence_dos_300k_m3 / effective_dos_for_mass_300k_m3(1.0)).powf(2.0 / 3.0)
    }

    /// This material with the given fields replaced, checked.
    pub fn with_overrides(mut self, overrides: &MaterialOverrides) -> Result<Self, MaterialError> {
        let replace = |target: &mut f64, value: Option<f64>| {
            if let Some(value) = value {
                *target = value;
            }
        };
        replace(&mut self.conduction_dos_300k_m3, overrides.conduction_dos_300k_m3);
        replace(&mut self.valence_dos_300k_m3, overrides.valence_dos_300k_m3);
        replace(&mut self.band_gap_0k_ev, overrides.band_gap_0k_ev);
        replace(&mut self.varshni_alpha_ev_per_k, overrides.varshni_alpha_ev_per_k);
        replace(&mut self.varshni_beta_k, overrides.varshni_beta_k);
        replace(&mut self.relative_permittivity, overrides.relative_permittivity);
        replace(
            &mut self.electron_conductivity_mass_ratio,
            overrides.electron_conductivity_mass_ratio,
        );
        replace(
            &mut self.hole_conductivity_mass_ratio,
            overrides.hole_conductivity_mass_ratio,
        );
        if let Some(law) = overrides.electron_lattice_mobility {
            self.electron_lattice_mobility = Some(law);
        }
        if let Some(law) = overrides.hole_lattice_mobility {
            self.hole_lattice_mobility = Some(law);
        }
        self.validate()?;
        Ok(self)
    }

    /// Checks every field: positive densities of states, permittivity and masses, a
    /// positive gap at 0 K, non-negative Varshni parameters, positive lattice mobilities
    /// with finite exponents.
    pub fn validate(&self) -> Result<(), MaterialError> {
        let positive = "give a finite value greater than zero";
        let non_negative = "give a finite value of zero or more";
        let checks: [(&'static str, f64, bool, &'static str); 8] = [
            (
                "conduction_dos_300K_m3",
                self.conduction_dos_300k_m3,
                self.conduction_dos_300k_m3 > 0.0,
                positive,
            ),
            (
                "valence_dos_300K_m3",
                self.valence_dos_300k_m3,
                self.valence_dos_300k_m3 > 0.0,
                positive,
            ),
            (
                "band_gap_0K_eV",
                self.band_gap_0k_ev,
                self.band_gap_0k_ev > 0.0,
                positive,
            ),
            (
                "varshni_alpha_eV_per_K",
                self.varshni_alpha_ev_per_k,
                self.varshni_alpha_ev_per_k >= 0.0,
                non_negative,
            ),
            (
                "varshni_beta_K",
                self.varshni_beta_k,
                self.varshni_beta_k >= 0.0,
                non_negative,
            ),
            (
                "relative_permittivity",
                self.relative_permittivity,
                self.relative_permittivity > 0.0,
                positive,
            ),
            (
                "electron_conductivity_mass_ratio",
                self.electron_conductivity_mass_ratio,
                self.electron_conductivity_mass_ratio > 0.0,
                positive,
            ),
            (
                "hole_conductivity_mass_ratio",
                self.hole_conductivity_mass_ratio,
                self.hole_conductivity_mass_ratio > 0.0,
                positive,
            ),
        ];
        for (field, value, ok, requirement) in checks {
            if !(ok && value.is_finite()) {
                return Err(MaterialError::InvalidValue {
                    field,
                    value,
                    requirement,
                });
            }
        }
        for (field, law) in [
            ("electron_lattice_mobility", self.electron_lattice_mobility),
            ("hole_lattice_mobility", self.hole_lattice_mobility),
        ] {
            if let Some(law) = law {
                if !(law.mobility_300k_m2_per_vs.is_finite() && law.mobility_300k_m2_per_vs > 0.0) {
                    return Err(MaterialError::InvalidValue {
                        field,
                        value: law.mobility_300k_m2_per_vs,
                        requirement: "give a finite positive mobility at 300 K",
                    });
                }
                if !law.exponent.is_finite() {
                    return Err(MaterialError::InvalidValue {
                        field,
                        value: law.exponent,
                        requirement: "give a finite temperature exponent",
                    });
                }
            }
        }
        Ok(())
    }
}

impl From<&Material> for BandModel {
    fn from(material: &Material) -> Self {
        material.band_model()
    }
}

impl From<Material> for BandModel {
    fn from(material: Material) -> Self {
        material.band_model()
    }
}

/// A shallow dopant's level as handbooks tabulate it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct DopantLevel {
    /// Chemical symbol.
    pub symbol: &'static str,
    /// N for a donor (its carriers are electrons), P for an acceptor.
    pub carrier_type: CarrierType,
    /// Ionization energy: below the conduction band for a donor, above the valence band for
    /// an acceptor, eV.
    pub ionization_energy_ev: f64,
}

/// Shallow dopants in silicon with the ionization energies of Sze and Ng, Physics of
/// Semiconductor Devices, 3rd ed. (Wiley, 2007), chapter 1 (all recalled from memory; the
/// handbook's figure of measured levels is the source to check them against). Antimony is
/// given its optical value, 43 meV (Ramdas and Rodriguez, Rep. Prog. Phys. 44, 1297, 1981,
/// from memory); a value near 39 meV is also quoted (from memory). Thermal and optical
/// determinations of one dopant differ by a few meV in general ([`DOPANT_LEVEL_SPREAD_EV`]).
pub const SILICON_DOPANT_LEVELS: [DopantLevel; 7] = [
    DopantLevel {
        symbol: "P",
        carrier_type: CarrierType::N,
        ionization_energy_ev: 0.045,
    },
    DopantLevel {
        symbol: "As",
        carrier_type: CarrierType::N,
        ionization_energy_ev: 0.054,
    },
    DopantLevel {
        symbol: "Sb",
        carrier_type: CarrierType::N,
        ionization_energy_ev: 0.043,
    },
    DopantLevel {
        symbol: "B",
        carrier_type: CarrierType::P,
        ionization_energy_ev: 0.045,
    },
    DopantLevel {
        symbol: "Al",
        carrier_type: CarrierType::P,
        ionization_energy_ev: 0.067,
    },
    DopantLevel {
        symbol: "Ga",
        carrier_type: CarrierType::P,
        ionization_energy_ev: 0.072,
    },
    DopantLevel {
        symbol: "In",
        carrier_type: CarrierType::P,
        ionization_energy_ev: 0.160,
    },
];

/// The spread of a tabulated level between determinations (thermal from freeze-out fits,
/// optical from absorption lines), eV: about 2 meV for the shallow dopants of silicon
/// (common practice; compare the 43 and 39 meV quoted for antimony).
pub const DOPANT_LEVEL_SPREAD_EV: f64 = 0.002;

/// The tabulated dopant levels of a material preset (silicon only, so far); empty for the
/// others.
pub fn dopant_levels(material_name: &str) -> &'static [DopantLevel] {
    match Material::preset(material_name) {
        Ok(material) if material.name == "Si" => &SILICON_DOPANT_LEVELS,
        _ => &[],
    }
}

/// The levels of `carrier_type` whose tabulated energy lies within two combined standard
/// uncertainties of a fitted `energy_ev`: sqrt(u^2 + spread^2) with the fit's `energy_unc_ev`
/// (0 when unknown) and [`DOPANT_LEVEL_SPREAD_EV`]. Closest first.
pub fn matching_dopant_levels(
    levels: &'static [DopantLevel],
    carrier_type: CarrierType,
    energy_ev: f64,
    energy_unc_ev: Option<f64>,
) -> Vec<&'static DopantLevel> {
    let combined = energy_unc_ev.unwrap_or(0.0).hypot(DOPANT_LEVEL_SPREAD_EV);
    let mut matches: Vec<&DopantLevel> = levels
        .iter()
        .filter(|level| level.carrier_type == carrier_type)
        .filter(|level| (level.ionization_energy_ev - energy_ev).abs() <= 2.0 * combined)
        .collect();
    matches.sort_by(|a, b| {
        (a.ionization_energy_ev - energy_ev)
            .abs()
            .total_cmp(&(b.ionization_energy_ev - energy_ev).abs())
    });
    matches
}

/// Replacements for any field of a [`Material`]; `None` keeps the preset's value.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct MaterialOverrides {
    pub conduction_dos_300k_m3: Option<f64>,
    pub valence_dos_300k_m3: Option<f64>,
    pub band_gap_0k_ev: Option<f64>,
    pub varshni_alpha_ev_per_k: Option<f64>,
    pub varshni_beta_k: Option<f64>,
    pub relative_permittivity: Option<f64>,
    pub electron_conductivity_mass_ratio: Option<f64>,
    pub hole_conductivity_mass_ratio: Option<f64>,
    pub electron_lattice_mobility: Option<LatticeMobility>,
    pub hole_lattice_mobility: Option<LatticeMobility>,
}

/// The effective density of states of a parabolic band of density-of-states mass
/// `mass_ratio` m0 at 300 K, 2 (2 pi m kT / h^2)^1.5, m^-3 (standard texts, e.g. Sze).
pub fn effective_dos_for_mass_300k_m3(mass_ratio: f64) -> f64 {
    let thermal_j = BOLTZMANN_J_PER_K * DOS_REFERENCE_TEMPERATURE_K;
    let base = 2.0 * std::f64::consts::PI * mass_ratio * ELECTRON_MASS_KG * thermal_j / (PLANCK_J_S * PLANCK_J_S);
    2.0 * base * base.sqrt()
}

/// Why a material cannot be built.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum MaterialError {
    /// No preset of that name.
    #[error(
        "no material preset is called {:?}; choose one of {} or give every band parameter explicitly",
        .0,
        PRESET_NAMES.join(", ")
    )]
    UnknownPreset(String),
    /// A field is out of range.
    #[error("material {field} is {value}; {requirement}")]
    InvalidValue {
        field: &'static str,
        value: f64,
        requirement: &'static str,
    },
}

#[cfg(test)]
mod tests {
    use super::*;

    const CM3: f64 = 1e6;

    fn close(actual: f64, expected: f64, relative: f64) -> bool {
        ((actual - expected) / expected).abs() <= relative
    }

    // Nc for m* = m0 at 300 K: 2.509412e19 cm^-3, computed from 2 (2 pi m0 kT / h^2)^1.5
    // with CODATA 2018 constants.
    #[test]
    fn free_electron_density_of_states_at_300_k() {
        assert!(close(effective_dos_for_mass_300k_m3(1.0), 2.509412e19 * CM3, 1e-6));
        // m^1.5 scaling.
        assert!(close(
            effective_dos_for_mass_300k_m3(0.25),
            effective_dos_for_mass_300k_m3(1.0) / 8.0,
            1e-14
        ));
    }

    // Levinshtein, Rumyantsev and Shur: Nc = 6.2e15 T^1.5, Nv = 3.5e15 T^1.5 cm^-3, at 300 K
    // 3.22161e19 and 1.81865e19 (computed from those expressions), and
    // Eg(300 K) = 1.124519 eV from their Varshni parameters.
    #[test]
    fn silicon_preset_matches_the_handbook_and_core() {
        let si = Material::silicon();
        assert!(close(si.conduction_dos_300k_m3, 3.22161e19 * CM3, 2e-6));
        assert!(close(si.valence_dos_300k_m3, 1.81865e19 * CM3, 2e-6));
        let bands = si.band_model();
        assert!((bands.band_gap_ev(300.0) - 1.124519).abs() < 1e-6);
        assert_eq!(bands, BandModel::silicon());
        // Density-of-states masses implied by the handbook's Nc and Nv: (Nc / 2.509412e19)^(2/3)
        // = 1.181 and 0.807, computed from the values above.
        assert!((si.electron_dos_mass_ratio() - 1.181).abs() < 1e-3);
        assert!((si.hole_dos_mass_ratio() - 0.807).abs() < 1e-3);
    }

    // Band gaps at 300 K computed from the presets' Varshni parameters, compared with the
    // room-temperature gaps the same handbook quotes (from memory: Ge 0.66, GaAs 1.424,
    // InP 1.344, GaN 3.39, 4H-SiC 3.23 eV); the Varshni fits reproduce them to within 10 meV.
    #[test]
    fn presets_reproduce_their_room_temperature_gaps() {
        for (name, gap_300k) in [
            ("Ge", 0.66),
            ("GaAs", 1.424),
            ("InP", 1.344),
            ("GaN", 3.39),
            ("4H-SiC", 3.23),
            ("Si", 1.12),
        ] {
            let material = Material::preset(name).unwrap();
            material.validate().unwrap();
            let gap = material.band_model().band_gap_ev(300.0);
            assert!((gap - gap_300k).abs() < 0.01, "{name}: {gap}");
            assert_eq!(material.name, name);
        }
    }

    #[test]
    fn every_preset_is_physical_and_reachable_by_name() {
        for (name, preset) in PRESET_NAMES.into_iter().zip(MaterialPreset::ALL) {
            // The parameter's choices are the preset names, each the same material.
            assert_eq!(preset.name(), name);
            assert_eq!(serde_json::to_value(preset).unwrap(), name);
            assert_eq!(preset.material().name, Material::preset(name).unwrap().name);
            let material = Material::preset(name).unwrap();
            material.validate().unwrap();
            // Density-of-states masses between 0.01 and 5 m0, a sanity range for these
            // crystals (common practice).
            for mass in [material.electron_dos_mass_ratio(), material.hole_dos_mass_ratio()] {
                assert!(mass > 0.01 && mass < 5.0, "{name}: {mass}");
            }
            // Intrinsic density at 300 K: below 1e14 cm^-3 for all of them (Ge, the narrowest
            // gap, has about 2e13 by the handbook, from memory).
            let intrinsic = material.band_model().intrinsic_density_m3(300.0);
            assert!(intrinsic < 1e14 * CM3, "{name}: {intrinsic}");
            assert_eq!(Material::preset(&name.to_lowercase()).unwrap(), material);
        }
        assert_eq!(Material::preset("SiC").unwrap().name, "4H-SiC");
        let error = Material::preset("unobtainium").unwrap_err();
        assert!(error.to_string().contains("GaAs"));
        assert!(!error.to_string().ends_with('.'));
    }

    // Every tabulated silicon donor lies deeper than the effective-mass ground state of
    // silicon's conduction band, 31.3 meV (Faulkner, Phys. Rev. 184, 713, 1969, from memory):
    // the central-cell correction only deepens a level. Acceptors lie above the valence
    // band's, about 31 meV (Baldereschi and Lipari 1974, from memory), indium far above.
    #[test]
    fn silicon_dopant_levels_lie_below_the_effective_mass_limit() {
        for level in SILICON_DOPANT_LEVELS {
            assert!(
                level.ionization_energy_ev > 0.031 && level.ionization_energy_ev < 0.2,
                "{}",
                level.symbol
            );
        }
        let donors = SILICON_DOPANT_LEVELS
            .iter()
            .filter(|level| level.carrier_type == CarrierType::N)
            .count();
        assert_eq!(donors, 3);
        assert_eq!(dopant_levels("si").len(), 7);
        assert!(dopant_levels("GaAs").is_empty());
        assert!(dopant_levels("unobtainium").is_empty());
    }

    // A fitted donor level names the dopants it could be: 45.2 +- 0.3 meV (the demo's
    // phosphorus, an invented test input) matches P (45) and Sb (43, 2.2 meV away within
    // 2 sqrt(0.3^2 + 2^2) = 4.0 meV) but not As (54); 54.5 +- 1 meV only As; 45 meV on the
    // acceptor side only B; 100 meV nothing.
    #[test]
    fn fitted_levels_name_their_candidate_dopants() {
        let names = |carrier_type, energy, unc| -> Vec<&str> {
            matching_dopant_levels(&SILICON_DOPANT_LEVELS, carrier_type, energy, unc)
                .iter()
                .map(|level| level.symbol)
                .collect()
        };
        assert_eq!(names(CarrierType::N, 0.0452, Some(0.0003)), vec!["P", "Sb"]);
        assert_eq!(names(CarrierType::N, 0.0545, Some(0.001)), vec!["As"]);
        assert_eq!(names(CarrierType::P, 0.045, None), vec!["B"]);
        assert!(names(CarrierType::N, 0.1, Some(0.001)).is_empty());
        // A poorly determined energy matches more: 70 +- 10 meV reaches from 49.6 to 90.4 meV.
        assert_eq!(names(CarrierType::P, 0.07, Some(0.01)), vec!["Ga", "Al"]);
    }

    #[test]
    fn overrides_replace_fields_and_are_checked() {
        // Green's Nc for silicon (2.86e19 cm^-3; M. A. Green, J. Appl. Phys. 67, 2944, 1990,
        // from memory), the other common handbook value.
        let green = Material::silicon()
            .with_overrides(&MaterialOverrides {
                conduction_dos_300k_m3: Some(2.86e19 * CM3),
                hole_lattice_mobility: Some(LatticeMobility {
                    mobility_300k_m2_per_vs: 0.045,
                    exponent: 2.3,
                }),
                ..MaterialOverrides::default()
            })
            .unwrap();
        assert_eq!(green.conduction_dos_300k_m3, 2.86e19 * CM3);
        assert_eq!(green.valence_dos_300k_m3, Material::silicon().valence_dos_300k_m3);
        assert_eq!(green.hole_lattice_mobility.unwrap().exponent, 2.3);
        let bands: BandModel = (&green).into();
        assert_eq!(bands.conduction_dos_300k_m3, 2.86e19 * CM3);
        let broken = Material::silicon().with_overrides(&MaterialOverrides {
            relative_permittivity: Some(-1.0),
            ..MaterialOverrides::default()
        });
        assert!(matches!(
            broken,
            Err(MaterialError::InvalidValue {
                field: "relative_permittivity",
                ..
            })
        ));
        let nan = Material::silicon().with_overrides(&MaterialOverrides {
            valence_dos_300k_m3: Some(f64::NAN),
            ..MaterialOverrides::default()
        });
        assert!(nan.is_err());
    }
}
