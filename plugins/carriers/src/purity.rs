//! The purity summary of a sample: how many donors and acceptors it holds, from the
//! freeze-out fit and from the mobility-scattering fit, side by side.
//!
//! Pure functions on plain structs; the plugin's glue fills [`PurityInput`] from the
//! results of `carriers.freeze_out_fit` and `carriers.mobility_scattering` and turns the
//! [`PuritySummary`] into a row.
//!
//! # Quantities
//!
//! A freeze-out fit gives the density of the majority dopant N_dop (donors in n-type
//! material, acceptors in p-type) and of the compensating species N_comp. From them:
//!
//! - **net doping** |N_dop - N_comp| = |N_D - N_A|, the density of carriers at full
//!   ionization;
//! - **compensation ratio** K = N_comp / N_dop, "compensating over majority": N_A / N_D for
//!   n-type and N_D / N_A for p-type, so that K lies between 0 (uncompensated) and 1 (fully
//!   compensated) for either type and reads the same way;
//! - **total impurity density** N_dop + N_comp = N_D + N_A, the density of centres that are
//!   charged when every dopant is ionized, and what ionized-impurity scattering sees then.
//!
//! Uncertainties are first order: for f(N_dop, N_comp) with gradient g,
//! u(f)^2 = g_1^2 u_dop^2 + g_2^2 u_comp^2 + 2 g_1 g_2 cov, with the covariance of the
//! freeze-out fit when it is known and zero otherwise. The two densities of a freeze-out fit
//! are usually strongly correlated (both are read from one curve), so the covariance matters:
//! it shrinks the uncertainty of a difference and grows that of a sum when positive.
//! A quantity whose gradient involves a density without an uncertainty has none.
//!
//! The mobility-scattering fit gives an ionized-impurity density N_I (and, with its
//! carriers-plus-compensation model, N_comp). When both fits ran, the summary shows the two
//! side by side with their ratio (scattering over freeze-out) and a verdict
//! ([`compare_densities`]); the reference the scattering fit chose, and why, is explained in
//! [`crate::scattering`]. Without a comparison from the scattering fit the fitted N_I is
//! compared with N_D + N_A.
//!
//! # The verdict
//!
//! Two positive densities agree when |ln(fitted / reference)| <= k sigma with
//! sigma^2 = (u_f / f)^2 + (u_r / r)^2 + m^2: the relative uncertainties of both plus a
//! relative uncertainty m of the scattering theory itself, in log space since both are
//! densities that may differ by a factor. [`ConsistencyTolerance`] holds k (default 2, the
//! common two-standard-uncertainty practice) and m ([`MODEL_RELATIVE_UNCERTAINTY`], 0.7).
//!
//! # Why m = 0.7: the comparison with published silicon mobilities
//!
//! The scattering fit (Brooks-Herring plus a power-law lattice term) was run on the
//! empirical silicon mobilities of Arora, Hauser and Roulston (IEEE Trans. Electron Devices
//! 29, 292, 1982) from 250 to 500 K, and on the same curves scaled to Masetti, Severi and
//! Solmi's 300 K values (IEEE Trans. Electron Devices 30, 764, 1983), for electrons and holes
//! from 1e14 to 1e18 cm^-3 (`scattering/validation.rs`). Where the mobility determines N_I it
//! comes out 1.3 to 3.4 times the doping, rising with doping: Brooks-Herring overestimates
//! the mobility of heavily doped silicon (it leaves out the dispersion of the screening and
//! multiple scattering; Chattopadhyay and Queisser, Rev. Mod. Phys. 53, 745, 1981), and the
//! fit pays for it with more centres. With m = 0.7 in ln N every one of those samples
//! agrees within 1.8 combined standard uncertainties; the former m = 0.3 (the spread between
//! Brooks-Herring and Conwell-Weisskopf alone) called every good sample from 1e17 cm^-3 up
//! inconsistent. The price: two counts within a factor of about 4 (e^(2 m)) of each other
//! agree. A count a tenth of the doping, or 20 times it, is still caught wherever the
//! mobility determines N_I.
//!
//! Below about 1e16 cm^-3 ionized-impurity scattering is a few per cent of the total from
//! 250 to 500 K and the fit ends on its lower bound. It then gives a profile upper limit
//! instead ([`compare_with_upper_limit`]): the data cannot tell a density below it from
//! none, so only a reference above it can disagree. The issue that prompted this measured
//! N_I at 0.05 of the doping there: that was the bound, not a measurement.

use crate::carrier_type::CarrierType;
use crate::freeze_out::FreezeOutFit;

/// A value with its standard uncertainty (`None` when it could not be estimated).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Estimate {
    pub value: f64,
    pub uncertainty: Option<f64>,
}

impl Estimate {
    /// The relative uncertainty u / |value|, when there is one.
    pub fn relative_uncertainty(&self) -> Option<f64> {
        self.uncertainty.map(|unc| unc / self.value.abs())
    }
}

/// Why a purity summary or a comparison is refused.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum PurityError {
    /// A density, uncertainty, covariance or tolerance is outside its range.
    #[error("{name} is {value}; {requirement}")]
    InvalidInput {
        name: &'static str,
        value: f64,
        requirement: &'static str,
    },
}

fn check(name: &'static str, value: f64, ok: bool, requirement: &'static str) -> Result<(), PurityError> {
    if ok && value.is_finite() {
        Ok(())
    } else {
        Err(PurityError::InvalidInput {
            name,
            value,
            requirement,
        })
    }
}

/// The majority-dopant and compensating densities of a freeze-out fit, m^-3, with standard
/// uncertainties and their covariance (m^-6) when known.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct DopantDensities {
    pub dopant_density_m3: f64,
    pub dopant_density_unc_m3: Option<f64>,
    pub compensating_density_m3: f64,
    pub compensating_density_unc_m3: Option<f64>,
    /// cov(N_dop, N_comp), m^-6; `None` is taken as independent.
    pub covariance_m6: Option<f64>,
}

impl DopantDensities {
    /// Checks that the densities are finite (the dopant's positive, the compensating one not
    /// negative), the uncertainties finite and not negative, and the covariance within
    /// |cov| <= u_dop u_comp (a correlation between -1 and 1, with a rounding margin).
    pub fn validate(&self) -> Result<(), PurityError> {
        check(
            "dopant_density_m3",
            self.dopant_density_m3,
            self.dopant_density_m3 > 0.0,
            "give the majority dopant density in m^-3, finite and positive",
        )?;
        check(
            "compensating_density_m3",
            self.compensating_density_m3,
            self.compensating_density_m3 >= 0.0,
            "give the compensating density in m^-3, finite and 0 or more",
        )?;
        for (name, unc) in [
            ("dopant_density_m3_unc", self.dopant_density_unc_m3),
            ("compensating_density_m3_unc", self.compensating_density_unc_m3),
        ] {
            if let Some(unc) = unc {
                check(
                    name,
                    unc,
                    unc >= 0.0,
                    "give a finite standard uncertainty of 0 or more, or none",
                )?;
            }
        }
        if let Some(covariance) = self.covariance_m6 {
            let limit =
                self.dopant_density_unc_m3.unwrap_or(f64::NAN) * self.compensating_density_unc_m3.unwrap_or(f64::NAN);
            check(
                "dopant_compensating_covariance_m6",
                covariance,
                limit.is_finite() && covariance.abs() <= limit * (1.0 + 1e-9),
                "give a covariance only with both uncertainties, and no larger in magnitude than their product",
            )?;
        }
        Ok(())
    }

    /// First-order uncertainty of f(N_dop, N_comp) with gradient [df/dN_dop, df/dN_comp];
    /// `None` when a density with a nonzero gradient component has no uncertainty.
    pub fn propagate(&self, gradient: [f64; 2]) -> Option<f64> {
        let term = |slope: f64, unc: Option<f64>| -> Option<f64> {
            if slope == 0.0 {
                Some(0.0)
            } else {
                unc.map(|unc| slope * unc)
            }
        };
        let dopant = term(gradient[0], self.dopant_density_unc_m3)?;
        let compensating = term(gradient[1], self.compensating_density_unc_m3)?;
        let covariance = self.covariance_m6.unwrap_or(0.0);
        let variance = dopant * dopant + compensating * compensating + 2.0 * gradient[0] * gradient[1] * covariance;
        // A covariance at the edge of its range can leave a rounding-negative variance.
        Some(variance.max(0.0).sqrt())
    }

    /// u(N_dop + N_comp).
    pub fn sum_uncertainty_m3(&self) -> Option<f64> {
        self.propagate([1.0, 1.0])
    }

    /// N_dop - N_comp (negative when the compensating density exceeds the dopant's).
    pub fn net_doping_m3(&self) -> Estimate {
        Estimate {
            value: self.dopant_density_m3 - self.compensating_density_m3,
            uncertainty: self.propagate([1.0, -1.0]),
        }
    }

    /// K = N_comp / N_dop.
    pub fn compensation_ratio(&self) -> Estimate {
        let dopant = self.dopant_density_m3;
        Estimate {
            value: self.compensating_density_m3 / dopant,
            uncertainty: self.propagate([-self.compensating_density_m3 / (dopant * dopant), 1.0 / dopant]),
        }
    }

    /// N_dop + N_comp.
    pub fn total_impurity_density_m3(&self) -> Estimate {
        Estimate {
            value: self.dopant_density_m3 + self.compensating_density_m3,
            uncertainty: self.sum_uncertainty_m3(),
        }
    }
}

impl From<&FreezeOutFit> for DopantDensities {
    /// The densities of a freeze-out fit with their covariance (taken only when both have an
    /// uncertainty: a density held at a bound has neither).
    fn from(fit: &FreezeOutFit) -> Self {
        let both = fit.dopant_density_m3_unc.is_some() && fit.compensating_density_m3_unc.is_some();
        DopantDensities {
            dopant_density_m3: fit.dopant_density_m3,
            dopant_density_unc_m3: fit.dopant_density_m3_unc,
            compensating_density_m3: fit.compensating_density_m3,
            compensating_density_unc_m3: fit.compensating_density_m3_unc,
            covariance_m6: both.then_some(fit.covariance[0][1]),
        }
    }
}

/// The default relative uncertainty of the scattering theory in the comparison, in ln N:
/// measured on the empirical silicon mobilities of Arora et al. (1982) and Masetti et al.
/// (1983) from 1e14 to 1e18 cm^-3 (module documentation).
pub const MODEL_RELATIVE_UNCERTAINTY: f64 = 0.7;

/// How far apart two density estimates may be and still agree (module documentation).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ConsistencyTolerance {
    /// k: agreement within k combined standard uncertainties. Default 2 (common practice).
    pub sigma_multiple: f64,
    /// m: relative uncertainty of the scattering theory, added in quadrature. Default
    /// [`MODEL_RELATIVE_UNCERTAINTY`] (0.7).
    pub model_relative_uncertainty: f64,
}

impl Default for ConsistencyTolerance {
    fn default() -> Self {
        ConsistencyTolerance {
            sigma_multiple: 2.0,
            model_relative_uncertainty: MODEL_RELATIVE_UNCERTAINTY,
        }
    }
}

impl ConsistencyTolerance {
    /// Checks that k is finite and positive and m finite and not negative.
    pub fn validate(&self) -> Result<(), PurityError> {
        check(
            "consistency_sigma_multiple",
            self.sigma_multiple,
            self.sigma_multiple > 0.0,
            "give a finite positive number of standard uncertainties (2 is common)",
        )?;
        check(
            "model_relative_uncertainty",
            self.model_relative_uncertainty,
            self.model_relative_uncertainty >= 0.0,
            "give a finite relative uncertainty of 0 or more (0.7 by default)",
        )
    }
}

/// What a fitted density was compared with.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ReferenceBasis {
    /// N_dop+ + N_comp- = n + 2 N_comp at the fitted temperatures, sensitivity-weighted
    /// (see [`crate::scattering`]).
    IonizedAtFitTemperatures,
    /// N_dop + N_comp: every dopant ionized.
    TotalImpurities,
    /// N_comp itself.
    CompensatingDensity,
}

impl ReferenceBasis {
    /// "ionized_at_fit_temperatures", "total_impurities" or "compensating_density".
    pub fn name(self) -> &'static str {
        match self {
            ReferenceBasis::IonizedAtFitTemperatures => "ionized_at_fit_temperatures",
            ReferenceBasis::TotalImpurities => "total_impurities",
            ReferenceBasis::CompensatingDensity => "compensating_density",
        }
    }

    /// A phrase for messages.
    pub fn description(self) -> &'static str {
        match self {
            ReferenceBasis::IonizedAtFitTemperatures => "ionized density n + 2 N_comp at the fitted temperatures",
            ReferenceBasis::TotalImpurities => "total impurity density N_D + N_A",
            ReferenceBasis::CompensatingDensity => "compensating density",
        }
    }
}

/// A fitted density beside its reference, and whether they agree.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct DensityComparison {
    /// What is compared: "ionized_impurity_density" or "compensating_density".
    pub quantity: &'static str,
    /// From the scattering fit, m^-3.
    pub fitted: Estimate,
    /// From the freeze-out fit, m^-3.
    pub reference: Estimate,
    pub basis: ReferenceBasis,
    /// fitted / reference.
    pub ratio: f64,
    /// Uncertainty of the ratio from the two estimates' uncertainties (not the theory's).
    pub ratio_unc: Option<f64>,
    /// |ln ratio| in combined standard uncertainties (theory included); for an upper limit,
    /// how far the reference lies above it, ln(reference / limit), in the same units (0 when
    /// it lies below).
    pub deviation_sigma: f64,
    pub consistent: bool,
    /// The fitted density's upper limit, m^-3, when the fit could not determine the density
    /// itself ([`compare_with_upper_limit`]).
    pub upper_limit_m3: Option<f64>,
}

/// Compares two positive densities (module documentation). A missing uncertainty counts as
/// zero; with no uncertainty at all and m = 0 only equal values agree.
pub fn compare_densities(
    quantity: &'static str,
    fitted: Estimate,
    reference: Estimate,
    basis: ReferenceBasis,
    tolerance: &ConsistencyTolerance,
) -> DensityComparison {
    let ratio = fitted.value / reference.value;
    let fitted_relative = fitted.relative_uncertainty().unwrap_or(0.0);
    let reference_relative = reference.relative_uncertainty().unwrap_or(0.0);
    let measured_relative = fitted_relative.hypot(reference_relative);
    let ratio_unc = if fitted.uncertainty.is_some() || reference.uncertainty.is_some() {
        Some(ratio.abs() * measured_relative)
    } else {
        None
    };
    let combined = measured_relative.hypot(tolerance.model_relative_uncertainty);
    let log_difference = ratio.ln().abs();
    let deviation_sigma = if combined > 0.0 {
        log_difference / combined
    } else if log_difference == 0.0 {
        0.0
    } else {
        f64::INFINITY
    };
    DensityComparison {
        quantity,
        fitted,
        reference,
        basis,
        ratio,
        ratio_unc,
        deviation_sigma,
        // NaN (a non-positive density) is never consistent.
        consistent: deviation_sigma <= tolerance.sigma_multiple,
        upper_limit_m3: None,
    }
}

/// Compares a density the fit could only bound from above with a reference: consistent
/// when the reference does not exceed the limit (already at `sigma_multiple` standard
/// uncertainties of the data) by more than `sigma_multiple` times the theory's and the
/// reference's relative uncertainties combined, ln(reference / limit) <= k sqrt(m^2 +
/// (u_r / r)^2). A reference below the limit always agrees: the data cannot tell it from
/// nothing.
pub fn compare_with_upper_limit(
    quantity: &'static str,
    fitted: Estimate,
    upper_limit_m3: f64,
    reference: Estimate,
    basis: ReferenceBasis,
    tolerance: &ConsistencyTolerance,
) -> DensityComparison {
    let reference_relative = reference.relative_uncertainty().unwrap_or(0.0);
    let combined = reference_relative.hypot(tolerance.model_relative_uncertainty);
    let excess = (reference.value / upper_limit_m3).ln().max(0.0);
    let deviation_sigma = if combined > 0.0 {
        excess / combined
    } else if excess == 0.0 {
        0.0
    } else {
        f64::INFINITY
    };
    DensityComparison {
        quantity,
        fitted,
        reference,
        basis,
        ratio: fitted.value / reference.value,
        ratio_unc: None,
        deviation_sigma,
        consistent: deviation_sigma <= tolerance.sigma_multiple,
        upper_limit_m3: Some(upper_limit_m3),
    }
}

/// What the scattering fit says about the impurities.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ScatteringDensities {
    /// N_I, m^-3.
    pub ionized_impurity_density_m3: Estimate,
    /// N_comp of the carriers-plus-compensation model, m^-3.
    pub compensating_density_m3: Option<Estimate>,
    /// The comparison the scattering fit made with the freeze-out result, if it was given
    /// one.
    pub comparison: Option<DensityComparison>,
    /// The upper limit of the fitted density (N_I, or N_comp when the fit has it), m^-3,
    /// when the mobilities could not determine the density itself.
    pub upper_limit_m3: Option<f64>,
}

/// One sample's results, whichever fits ran.
#[derive(Debug, Clone, PartialEq)]
pub struct PurityInput {
    pub sample: String,
    /// Needed only to name the densities donors and acceptors.
    pub carrier_type: Option<CarrierType>,
    pub freeze_out: Option<DopantDensities>,
    pub scattering: Option<ScatteringDensities>,
}

/// One sample's purity summary. Densities in m^-3; `None` where the fit that gives the
/// quantity did not run.
#[derive(Debug, Clone, PartialEq)]
pub struct PuritySummary {
    pub sample: String,
    pub carrier_type: Option<CarrierType>,
    pub dopant_density_m3: Option<Estimate>,
    pub compensating_density_m3: Option<Estimate>,
    /// N_D: the dopant density for n-type, the compensating one for p-type.
    pub donor_density_m3: Option<Estimate>,
    /// N_A: the other one.
    pub acceptor_density_m3: Option<Estimate>,
    /// |N_D - N_A|.
    pub net_doping_m3: Option<Estimate>,
    /// N_comp / N_dop.
    pub compensation_ratio: Option<Estimate>,
    /// N_D + N_A.
    pub total_impurity_density_m3: Option<Estimate>,
    /// N_I from the scattering fit.
    pub scattering_ionized_density_m3: Option<Estimate>,
    /// N_comp from the scattering fit (carriers-plus-compensation model).
    pub scattering_compensating_density_m3: Option<Estimate>,
    /// Scattering against freeze-out, when both ran.
    pub comparison: Option<DensityComparison>,
    pub warnings: Vec<String>,
}

/// The purity summary of one sample.
pub fn summarize_purity(input: &PurityInput, tolerance: &ConsistencyTolerance) -> Result<PuritySummary, PurityError> {
    tolerance.validate()?;
    let mut warnings = Vec::new();
    let mut summary = PuritySummary {
        sample: input.sample.clone(),
        carrier_type: input.carrier_type,
        dopant_density_m3: None,
        compensating_density_m3: None,
        donor_density_m3: None,
        acceptor_density_m3: None,
        net_doping_m3: None,
        compensation_ratio: None,
        total_impurity_density_m3: None,
        scattering_ionized_density_m3: None,
        scattering_compensating_density_m3: None,
        comparison: None,
        warnings: Vec::new(),
    };
    if let Some(densities) = &input.freeze_out {
        densities.validate()?;
        let dopant = Estimate {
            value: densities.dopant_density_m3,
            uncertainty: densities.dopant_density_unc_m3,
        };
        let compensating = Estimate {
            value: densities.compensating_density_m3,
            uncertainty: densities.compensating_density_unc_m3,
        };
        summary.dopant_density_m3 = Some(dopant);
        summary.compensating_density_m3 = Some(compensating);
        match input.carrier_type {
            Some(CarrierType::N) => {
                summary.donor_density_m3 = Some(dopant);
                summary.acceptor_density_m3 = Some(compensating);
            }
            Some(CarrierType::P) => {
                summary.donor_density_m3 = Some(compensating);
                summary.acceptor_density_m3 = Some(dopant);
            }
            None => {}
        }
        let net = densities.net_doping_m3();
        if net.value < 0.0 {
            warnings.push(format!(
                "the compensating density ({:.4e} cm^-3) exceeds the dopant density ({:.4e} cm^-3): the freeze-out \
                 result contradicts the carrier type; check which species the fit took as the majority",
                densities.compensating_density_m3 * 1e-6,
                densities.dopant_density_m3 * 1e-6
            ));
        }
        summary.net_doping_m3 = Some(Estimate {
            value: net.value.abs(),
            uncertainty: net.uncertainty,
        });
        summary.compensation_ratio = Some(densities.compensation_ratio());
        summary.total_impurity_density_m3 = Some(densities.total_impurity_density_m3());
    }
    if let Some(scattering) = &input.scattering {
        for (name, estimate) in [
            (
                "scattering ionized_impurity_density_m3",
                Some(scattering.ionized_impurity_density_m3),
            ),
            ("scattering compensating_density_m3", scattering.compensating_density_m3),
        ] {
            if let Some(estimate) = estimate {
                check(
                    name,
                    estimate.value,
                    estimate.value > 0.0,
                    "give a finite positive density in m^-3",
                )?;
                if let Some(unc) = estimate.uncertainty {
                    check(
                        name,
                        unc,
                        unc >= 0.0,
                        "give a finite standard uncertainty of 0 or more, or none",
                    )?;
                }
            }
        }
        summary.scattering_ionized_density_m3 = Some(scattering.ionized_impurity_density_m3);
        summary.scattering_compensating_density_m3 = scattering.compensating_density_m3;
    }
    if let (Some(densities), Some(scattering)) = (&input.freeze_out, &input.scattering) {
        // The scattering fit chose the reference; the verdict uses this tolerance.
        let (quantity, fitted, reference, basis) = match (scattering.comparison, scattering.compensating_density_m3) {
            (Some(made), _) => (made.quantity, made.fitted, made.reference, made.basis),
            (None, Some(compensating)) => (
                "compensating_density",
                compensating,
                summary.compensating_density_m3.expect("set from the freeze-out result"),
                ReferenceBasis::CompensatingDensity,
            ),
            (None, None) => (
                "ionized_impurity_density",
                scattering.ionized_impurity_density_m3,
                densities.total_impurity_density_m3(),
                ReferenceBasis::TotalImpurities,
            ),
        };
        let comparison = match scattering.upper_limit_m3 {
            Some(limit) => compare_with_upper_limit(quantity, fitted, limit, reference, basis, tolerance),
            None => compare_densities(quantity, fitted, reference, basis, tolerance),
        };
        if !comparison.consistent {
            warnings.push(format!(
                "the scattering fit's {} is {:.3} times the freeze-out {} ({:.2} combined standard uncertainties \
                 apart): the two analyses disagree about the impurity content",
                comparison.quantity.replace('_', " "),
                comparison.ratio,
                comparison.basis.description(),
                comparison.deviation_sigma
            ));
        }
        summary.comparison = Some(comparison);
    }
    summary.warnings = warnings;
    Ok(summary)
}

#[cfg(test)]
mod tests;
