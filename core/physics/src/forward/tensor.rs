//! The magnetoconductivity tensor of several independent carriers, and synthetic field
//! sweeps generated from it.
//!
//! # Model
//!
//! Each carrier i is a kind (electron or hole, sign s_i = -1 or +1), a sheet density n_i and
//! a mobility mu_i, each carrier with its own constant relaxation time (the Drude picture).
//! In a perpendicular field B the carriers conduct in parallel, so their conductivity
//! tensors add (Beck and Anderson, J. Appl. Phys. 62, 541, 1987):
//!
//! - sigma_xx(B) = sum_i e n_i mu_i / (1 + mu_i^2 B^2)
//! - sigma_xy(B) = sum_i s_i e n_i mu_i^2 B / (1 + mu_i^2 B^2)
//!
//! and the resistivity tensor is its inverse,
//!
//! - rho_xx = sigma_xx / (sigma_xx^2 + sigma_xy^2), rho_xy = sigma_xy / (sigma_xx^2 + sigma_xy^2).
//!
//! Sign convention: sigma_xy and rho_xy carry the same sign, positive for holes at positive
//! field, as `rho_xy_ohm` of the `sweep` table and the Hall voltage of the `readings` table
//! do. In that convention the inversion is the same map in both directions: with
//! z = rho_xx + i rho_xy and w = sigma_xx - i sigma_xy, z w = 1 ([`invert_tensor`]).
//!
//! # Units
//!
//! Densities are sheet densities (m^-2), so the conductivities are sheet conductances (S)
//! and the resistivities sheet resistances (ohm per square, rho_xy in ohm). The formulas are
//! the same for a volume: a layer of thickness t with density n_3D has n_i = n_3D t
//! ([`Carrier::from_volume_density`]), and then sigma_3D = sigma / t, rho_3D = rho t.
//!
//! Limiting forms used as checks and as starting values of the fits:
//! - one carrier gives no magnetoresistance: rho_xx(B) = 1 / (e n mu) at every field and
//!   rho_xy = s B / (e n);
//! - low field: R_H(0) = rho_xy / B -> sum s_i n_i mu_i^2 / (e (sum n_i mu_i)^2)
//!   ([`low_field_hall_coefficient_m2_per_c`]);
//! - high field: R_H(inf) = 1 / (e sum s_i n_i) ([`high_field_hall_coefficient_m2_per_c`]).
//!
//! # Synthetic sweeps
//!
//! [`synthetic_sweep`] evaluates rho_xx and rho_xy at the given fields and adds what a real
//! sweep carries: Gaussian noise of standard deviation `absolute_ohm + relative |rho|` on
//! each component, a Hall-contact misalignment that mixes a fraction of rho_xx(B) into
//! rho_xy (even in field) and a pickup of a fraction of rho_xy(B) into rho_xx (odd in field).
//! The noise is drawn in the order of the fields, rho_xx before rho_xy, so a seed fixes
//! every value. The points come out in the `sweep` table convention
//! ([`crate::sweep::SweepPoint`]), with the noise standard deviations as uncertainties when
//! the noise has an absolute floor (without one the uncertainty of rho_xy would vanish at
//! zero field, which no measurement has).

use super::{require_finite, require_non_negative, require_positive, ForwardError};
use crate::constants::ELEMENTARY_CHARGE_C;
use crate::sweep::{ResistivityUncertainty, SweepPoint};
use mobilis_numerics::noise::Rng;
// The tensors at one field live below both the forward models and the sweeps, which use them.
use crate::field_tensor::{ConductivityTensor, ResistivityTensor};

/// Electron or hole.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum CarrierKind {
    Electron,
    Hole,
}

impl CarrierKind {
    /// The sign s of the carrier's charge: -1 for electrons, +1 for holes.
    pub fn charge_sign(self) -> f64 {
        match self {
            CarrierKind::Electron => -1.0,
            CarrierKind::Hole => 1.0,
        }
    }

    /// The `carrier_type` code of the tables: "n" or "p".
    pub fn code(self) -> &'static str {
        match self {
            CarrierKind::Electron => "n",
            CarrierKind::Hole => "p",
        }
    }

    /// The kind of a `carrier_type` code, "n" or "p"; the error says what to give instead.
    pub fn from_code(code: &str) -> Result<CarrierKind, String> {
        match code {
            "n" => Ok(CarrierKind::Electron),
            "p" => Ok(CarrierKind::Hole),
            other => Err(format!("carrier `{other}` is unknown; use n or p")),
        }
    }

    /// "electron" or "hole".
    pub fn name(self) -> &'static str {
        match self {
            CarrierKind::Electron => "electron",
            CarrierKind::Hole => "hole",
        }
    }
}

/// One kind of carrier conducting in parallel with the others.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Carrier {
    pub kind: CarrierKind,
    /// Sheet density, m^-2.
    pub sheet_density_m2: f64,
    /// Drift mobility, m^2/(V s), positive.
    pub mobility_m2_per_vs: f64,
}

impl Carrier {
    pub fn electron(sheet_density_m2: f64, mobility_m2_per_vs: f64) -> Self {
        Carrier {
            kind: CarrierKind::Electron,
            sheet_density_m2,
            mobility_m2_per_vs,
        }
    }

    pub fn hole(sheet_density_m2: f64, mobility_m2_per_vs: f64) -> Self {
        Carrier {
            kind: CarrierKind::Hole,
            sheet_density_m2,
            mobility_m2_per_vs,
        }
    }

    /// A carrier of volume density `density_m3` spread uniformly through `thickness_m`:
    /// sheet density n_3D t.
    pub fn from_volume_density(
        kind: CarrierKind,
        density_m3: f64,
        mobility_m2_per_vs: f64,
        thickness_m: f64,
    ) -> Result<Self, ForwardError> {
        require_positive("density_m3", density_m3)?;
        require_positive("thickness_m", thickness_m)?;
        let carrier = Carrier {
            kind,
            sheet_density_m2: density_m3 * thickness_m,
            mobility_m2_per_vs,
        };
        carrier.validate()?;
        Ok(carrier)
    }

    /// Density and mobility must be finite and positive.
    pub fn validate(&self) -> Result<(), ForwardError> {
        require_positive("sheet_density_m2", self.sheet_density_m2)?;
        require_positive("mobility_m2_per_vs", self.mobility_m2_per_vs)?;
        Ok(())
    }

    /// Zero-field sheet conductance e n mu, S.
    pub fn sheet_conductance_s(&self) -> f64 {
        ELEMENTARY_CHARGE_C * self.sheet_density_m2 * self.mobility_m2_per_vs
    }

    /// This carrier's share of the conductivity tensor at `field_t` (no validation).
    pub fn conductivity(&self, field_t: f64) -> ConductivityTensor {
        let mu = self.mobility_m2_per_vs;
        let mu_b = mu * field_t;
        let denominator = 1.0 + mu_b * mu_b;
        let conductance = ELEMENTARY_CHARGE_C * self.sheet_density_m2 * mu;
        ConductivityTensor {
            sigma_xx_s: conductance / denominator,
            sigma_xy_s: self.kind.charge_sign() * conductance * mu_b / denominator,
        }
    }
}

fn validate_carriers(carriers: &[Carrier]) -> Result<(), ForwardError> {
    if carriers.is_empty() {
        return Err(ForwardError::InvalidParameter {
            name: "carriers",
            value: 0.0,
            requirement: "give at least one carrier",
        });
    }
    carriers.iter().try_for_each(Carrier::validate)
}

/// The summed conductivity tensor of `carriers` at `field_t`.
pub fn conductivity_tensor(carriers: &[Carrier], field_t: f64) -> Result<ConductivityTensor, ForwardError> {
    validate_carriers(carriers)?;
    require_finite("field_t", field_t)?;
    Ok(sum_conductivity(carriers, field_t))
}

/// The summed conductivity tensor without validation (the fits call it in their inner loop
/// on parameters they keep in range).
pub fn sum_conductivity(carriers: &[Carrier], field_t: f64) -> ConductivityTensor {
    carriers.iter().fold(
        ConductivityTensor {
            sigma_xx_s: 0.0,
            sigma_xy_s: 0.0,
        },
        |total, carrier| {
            let part = carrier.conductivity(field_t);
            ConductivityTensor {
                sigma_xx_s: total.sigma_xx_s + part.sigma_xx_s,
                sigma_xy_s: total.sigma_xy_s + part.sigma_xy_s,
            }
        },
    )
}

/// The resistivity tensor of `carriers` at `field_t`.
pub fn resistivity_tensor(carriers: &[Carrier], field_t: f64) -> Result<ResistivityTensor, ForwardError> {
    Ok(conductivity_tensor(carriers, field_t)?.to_resistivity())
}

/// The low-field limit of the sheet Hall coefficient rho_xy / B, m^2/C:
/// sum s_i n_i mu_i^2 / (e (sum n_i mu_i)^2). Positive when holes dominate the conductance.
pub fn low_field_hall_coefficient_m2_per_c(carriers: &[Carrier]) -> Result<f64, ForwardError> {
    validate_carriers(carriers)?;
    let numerator: f64 = carriers
        .iter()
        .map(|c| c.kind.charge_sign() * c.sheet_density_m2 * c.mobility_m2_per_vs * c.mobility_m2_per_vs)
        .sum();
    let conductance: f64 = carriers.iter().map(|c| c.sheet_density_m2 * c.mobility_m2_per_vs).sum();
    Ok(numerator / (ELEMENTARY_CHARGE_C * conductance * conductance))
}

/// The high-field limit of the sheet Hall coefficient, 1 / (e sum s_i n_i), m^2/C; `None`
/// for an exactly compensated set (equal electron and hole sheet densities), whose rho_xy
/// does not become linear in B.
pub fn high_field_hall_coefficient_m2_per_c(carriers: &[Carrier]) -> Result<Option<f64>, ForwardError> {
    validate_carriers(carriers)?;
    let net: f64 = carriers.iter().map(|c| c.kind.charge_sign() * c.sheet_density_m2).sum();
    Ok((net != 0.0).then(|| 1.0 / (ELEMENTARY_CHARGE_C * net)))
}

/// Gaussian noise of a synthetic sweep: standard deviation `absolute_ohm + relative |rho|`
/// for each of rho_xx and rho_xy.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SweepNoise {
    /// Floor, ohm (ohm per square for rho_xx).
    pub absolute_ohm: f64,
    /// Fraction of the component's magnitude.
    pub relative: f64,
}

impl SweepNoise {
    /// No noise: the sweep equals the model.
    pub const NONE: SweepNoise = SweepNoise {
        absolute_ohm: 0.0,
        relative: 0.0,
    };
}

/// Field-symmetry defects of a real sweep (both zero for an ideal one).
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct SweepImperfections {
    /// Fraction of rho_xx(B) that appears in rho_xy (Hall contacts not on one
    /// equipotential): an even-in-field part.
    pub hall_misalignment: f64,
    /// Fraction of rho_xy(B) that appears in rho_xx (longitudinal contacts not aligned with
    /// the current): an odd-in-field part.
    pub longitudinal_hall_pickup: f64,
}

/// A synthetic sweep of `carriers` at `fields_t`, in the order given (see the module
/// documentation for the noise and the imperfections).
pub fn synthetic_sweep(
    carriers: &[Carrier],
    fields_t: &[f64],
    noise: &SweepNoise,
    imperfections: &SweepImperfections,
    rng: &mut Rng,
) -> Result<Vec<SweepPoint>, ForwardError> {
    validate_carriers(carriers)?;
    require_non_negative("noise.absolute_ohm", noise.absolute_ohm)?;
    require_non_negative("noise.relative", noise.relative)?;
    require_finite("imperfections.hall_misalignment", imperfections.hall_misalignment)?;
    require_finite(
        "imperfections.longitudinal_hall_pickup",
        imperfections.longitudinal_hall_pickup,
    )?;
    fields_t
        .iter()
        .map(|&field| {
            require_finite("fields_t", field)?;
            let ideal = sum_conductivity(carriers, field).to_resistivity();
            let rho_xx = ideal.rho_xx_ohm_sq + imperfections.longitudinal_hall_pickup * ideal.rho_xy_ohm;
            let rho_xy = ideal.rho_xy_ohm + imperfections.hall_misalignment * ideal.rho_xx_ohm_sq;
            let sd_xx = noise.absolute_ohm + noise.relative * rho_xx.abs();
            let sd_xy = noise.absolute_ohm + noise.relative * rho_xy.abs();
            let point = SweepPoint::new(
                field,
                rho_xx + sd_xx * rng.standard_normal(),
                rho_xy + sd_xy * rng.standard_normal(),
            );
            Ok(if noise.absolute_ohm > 0.0 {
                point.with_uncertainty(ResistivityUncertainty::independent(sd_xx, sd_xy))
            } else {
                point
            })
        })
        .collect()
}

/// `steps_per_sign + 1` evenly spaced fields from 0 to `max_field_t` and their negatives,
/// ascending from -max to +max, zero once: the setpoints of a symmetric sweep.
pub fn symmetric_fields(max_field_t: f64, steps_per_sign: usize) -> Result<Vec<f64>, ForwardError> {
    require_positive("max_field_t", max_field_t)?;
    if steps_per_sign == 0 {
        return Err(ForwardError::InvalidParameter {
            name: "steps_per_sign",
            value: 0.0,
            requirement: "give at least one step per field sign",
        });
    }
    let step = max_field_t / steps_per_sign as f64;
    let positive: Vec<f64> = (1..=steps_per_sign).map(|k| k as f64 * step).collect();
    Ok(positive
        .iter()
        .rev()
        .map(|b| -b)
        .chain(std::iter::once(0.0))
        .chain(positive.iter().copied())
        .collect())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::field_tensor::invert_tensor;

    const CM3: f64 = 1e6;
    const CM2_PER_VS: f64 = 1e-4;

    fn close(actual: f64, expected: f64, relative: f64) -> bool {
        ((actual - expected) / expected).abs() <= relative
    }

    /// A reference pair (an invented test input): electrons 1e16 cm^-3 at 1000 cm^2/Vs and
    /// holes 1e17 cm^-3 at 100 cm^2/Vs, in a layer of `thickness_m`.
    fn check_pair(thickness_m: f64) -> Vec<Carrier> {
        vec![
            Carrier::from_volume_density(CarrierKind::Electron, 1e16 * CM3, 1000.0 * CM2_PER_VS, thickness_m).unwrap(),
            Carrier::from_volume_density(CarrierKind::Hole, 1e17 * CM3, 100.0 * CM2_PER_VS, thickness_m).unwrap(),
        ]
    }

    // Computed from the Beck and Anderson (J. Appl. Phys. 62, 541, 1987) sums with CODATA
    // 2018 e, evaluated independently of this code in double precision and kept to 8
    // digits: sigma_xx(0) = 320.43533 S/m,
    // rho_0 = 3.1207545e-3 ohm m, rho at 1 T and 10 T. The layer is 1 um thick, so the sheet
    // quantities are converted through the thickness as a 3D sample's would be.
    #[test]
    fn tensor_two_carrier_reference_values() {
        let thickness = 1e-6;
        let carriers = check_pair(thickness);
        let zero = conductivity_tensor(&carriers, 0.0).unwrap();
        assert!(close(zero.sigma_xx_s / thickness, 320.435_33, 1e-6), "{zero:?}");
        assert_eq!(zero.sigma_xy_s, 0.0);
        let rho_0 = zero.to_resistivity();
        assert!(close(rho_0.rho_xx_ohm_sq * thickness, 3.120_754_5e-3, 1e-6));
        let one = resistivity_tensor(&carriers, 1.0).unwrap();
        assert!(close(one.rho_xx_ohm_sq * thickness, 3.130_175_7e-3, 1e-6), "{one:?}");
        assert!(close(one.rho_xy_ohm * thickness, -1.400_100_0e-4, 1e-6), "{one:?}");
        let ten = resistivity_tensor(&carriers, 10.0).unwrap();
        assert!(close(ten.rho_xx_ohm_sq * thickness, 3.905_809_2e-3, 1e-6), "{ten:?}");
        assert!(close(ten.rho_xy_ohm * thickness, -1.051_064_9e-3, 1e-6), "{ten:?}");
        // The same numbers straight from volume densities (thickness 1 m: sheet = volume).
        let bulk = check_pair(1.0);
        let ten_bulk = resistivity_tensor(&bulk, 10.0).unwrap();
        assert!(close(ten_bulk.rho_xx_ohm_sq, 3.905_809_2e-3, 1e-6));
    }

    // Computed from the same sums (Beck and Anderson 1987): R_H(B -> 0) = -1.404340e-4 m^3/C and
    // R_H(B -> inf) = 1/(e (p - n)) = +6.935010e-5 m^3/C, both from the closed limits and
    // from rho_xy / B of the full tensor at a very low and a very high field.
    #[test]
    fn tensor_hall_coefficient_limits_match_the_reference_values() {
        let thickness = 1e-6;
        let carriers = check_pair(thickness);
        let low = low_field_hall_coefficient_m2_per_c(&carriers).unwrap() * thickness;
        assert!(close(low, -1.404_340e-4, 1e-6), "{low}");
        let high = high_field_hall_coefficient_m2_per_c(&carriers).unwrap().unwrap() * thickness;
        assert!(close(high, 6.935_010e-5, 1e-6), "{high}");
        // rho_xy / B at 1e-4 T differs from the limit by about (mu B)^2 ~ 1e-9.
        let tiny = resistivity_tensor(&carriers, 1e-4).unwrap();
        assert!(close(tiny.rho_xy_ohm * thickness / 1e-4, -1.404_340e-4, 1e-6));
        // At 1e7 T the remainder is of order 1/(mu_p B)^2 = 1e-10.
        let huge = resistivity_tensor(&carriers, 1e7).unwrap();
        assert!(close(huge.rho_xy_ohm * thickness / 1e7, 6.935_010e-5, 1e-6));
        let compensated = [Carrier::electron(1e16, 0.1), Carrier::hole(1e16, 0.01)];
        assert_eq!(high_field_hall_coefficient_m2_per_c(&compensated).unwrap(), None);
    }

    // One Drude carrier alone gives no magnetoresistance (Ashcroft and Mermin, Solid State
    // Physics, 1976, ch. 1; from memory): rho_xx = 1/(e n mu) at every field and
    // rho_xy = s B/(e n).
    #[test]
    fn tensor_single_carrier_has_no_magnetoresistance() {
        for carrier in [Carrier::electron(3e15, 2.5), Carrier::hole(7e17, 0.004)] {
            let rho_0 = 1.0 / carrier.sheet_conductance_s();
            for field in [-30.0, -9.0, -0.5, 0.0, 0.01, 1.0, 9.0, 45.0] {
                let rho = resistivity_tensor(&[carrier], field).unwrap();
                assert!(
                    close(rho.rho_xx_ohm_sq, rho_0, 1e-13),
                    "{carrier:?} at {field} T: {rho:?}"
                );
                let hall = carrier.kind.charge_sign() * field / (ELEMENTARY_CHARGE_C * carrier.sheet_density_m2);
                assert!(
                    (rho.rho_xy_ohm - hall).abs() <= 1e-13 * rho_0.max(hall.abs()),
                    "{rho:?} vs {hall}"
                );
            }
        }
    }

    // The closed two-band expressions (the two-band model, Ashcroft and Mermin, Solid State
    // Physics, 1976, ch. 12, problem 4; from memory), D = (n mu_n + p mu_p)^2 + (p - n)^2 mu_n^2
    // mu_p^2 B^2: rho_xx = [(n mu_n + p mu_p) + (n mu_n mu_p^2 + p mu_p mu_n^2) B^2] / (e D),
    // rho_xy = B [(p mu_p^2 - n mu_n^2) + (p - n) mu_n^2 mu_p^2 B^2] / (e D). The inversion
    // of the summed tensor must agree with them.
    #[test]
    fn tensor_inversion_agrees_with_the_closed_two_band_form() {
        let (n, mu_n, p, mu_p) = (4e15, 1.3, 9e15, 0.07);
        let carriers = [Carrier::electron(n, mu_n), Carrier::hole(p, mu_p)];
        for field in [-12.0, -1.0, 0.0, 0.3, 2.0, 9.0, 60.0] {
            let d = (n * mu_n + p * mu_p).powi(2) + (p - n).powi(2) * mu_n.powi(2) * mu_p.powi(2) * field * field;
            let rho_xx = ((n * mu_n + p * mu_p) + (n * mu_n * mu_p * mu_p + p * mu_p * mu_n * mu_n) * field * field)
                / (ELEMENTARY_CHARGE_C * d);
            let rho_xy = field
                * ((p * mu_p * mu_p - n * mu_n * mu_n) + (p - n) * mu_n * mu_n * mu_p * mu_p * field * field)
                / (ELEMENTARY_CHARGE_C * d);
            let rho = resistivity_tensor(&carriers, field).unwrap();
            assert!(close(rho.rho_xx_ohm_sq, rho_xx, 1e-12), "{field}: {rho:?} vs {rho_xx}");
            assert!(
                (rho.rho_xy_ohm - rho_xy).abs() <= 1e-12 * rho_xx,
                "{field}: {rho:?} vs {rho_xy}"
            );
        }
    }

    // The contract: rho_xy is positive for holes at positive field. And inverting twice
    // returns the tensor (the map is an involution).
    #[test]
    fn tensor_sign_convention_and_inversion_round_trip() {
        let holes = resistivity_tensor(&[Carrier::hole(1e16, 0.1)], 1.0).unwrap();
        assert!(holes.rho_xy_ohm > 0.0);
        let electrons = resistivity_tensor(&[Carrier::electron(1e16, 0.1)], 1.0).unwrap();
        assert!(electrons.rho_xy_ohm < 0.0);
        for (xx, xy) in [(1.0, 0.0), (2.5e-3, -7.0e-4), (1e150, 3e149), (1e-150, -2e-151)] {
            let (a, b) = invert_tensor(xx, xy);
            let (back_xx, back_xy) = invert_tensor(a, b);
            assert!(
                close(back_xx, xx, 1e-15) && (back_xy - xy).abs() <= 1e-15 * xx,
                "{xx} {xy}"
            );
        }
    }

    #[test]
    fn tensor_synthetic_sweep_is_reproducible_and_carries_its_noise() {
        let carriers = [Carrier::electron(2e16, 0.8), Carrier::hole(5e16, 0.05)];
        let fields = symmetric_fields(9.0, 200).unwrap();
        assert_eq!(fields.len(), 401);
        assert_eq!((fields[0], fields[200], fields[400]), (-9.0, 0.0, 9.0));
        let noise = SweepNoise {
            absolute_ohm: 0.05,
            relative: 2e-3,
        };
        let imperfections = SweepImperfections::default();
        let first = synthetic_sweep(&carriers, &fields, &noise, &imperfections, &mut Rng::seeded(5)).unwrap();
        let second = synthetic_sweep(&carriers, &fields, &noise, &imperfections, &mut Rng::seeded(5)).unwrap();
        assert_eq!(first, second);
        // Standardized deviations from the model: mean 0, variance 1 (5 standard errors of
        // 802 normal deviates: mean 0.18, variance 0.25).
        let mut z = Vec::new();
        for point in &first {
            let ideal = resistivity_tensor(&carriers, point.field_t).unwrap();
            let unc = point.uncertainty.unwrap();
            z.push((point.rho_xx_ohm_sq - ideal.rho_xx_ohm_sq) / unc.rho_xx_ohm_sq);
            z.push((point.rho_xy_ohm - ideal.rho_xy_ohm) / unc.rho_xy_ohm);
            assert!(close(unc.rho_xx_ohm_sq, 0.05 + 2e-3 * ideal.rho_xx_ohm_sq.abs(), 1e-12));
        }
        let mean = z.iter().sum::<f64>() / z.len() as f64;
        let variance = z.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / (z.len() - 1) as f64;
        assert!(mean.abs() < 0.18, "{mean}");
        assert!((variance - 1.0).abs() < 0.25, "{variance}");
        // Without an absolute floor no uncertainty is attached.
        let relative_only = SweepNoise {
            absolute_ohm: 0.0,
            relative: 1e-3,
        };
        let bare = synthetic_sweep(&carriers, &fields, &relative_only, &imperfections, &mut Rng::seeded(5)).unwrap();
        assert!(bare.iter().all(|p| p.uncertainty.is_none()));
    }

    #[test]
    fn tensor_imperfections_have_the_stated_field_parity() {
        let carriers = [Carrier::electron(2e16, 0.8)];
        let imperfections = SweepImperfections {
            hall_misalignment: 0.02,
            longitudinal_hall_pickup: -0.01,
        };
        let sweep = synthetic_sweep(
            &carriers,
            &[-2.0, 2.0],
            &SweepNoise::NONE,
            &imperfections,
            &mut Rng::seeded(1),
        )
        .unwrap();
        let ideal = resistivity_tensor(&carriers, 2.0).unwrap();
        // rho_xx(+B) - rho_xx(-B) = 2 beta rho_xy(B); rho_xy(+B) + rho_xy(-B) = 2 alpha rho_xx.
        let odd_xx = (sweep[1].rho_xx_ohm_sq - sweep[0].rho_xx_ohm_sq) / 2.0;
        let even_xy = (sweep[1].rho_xy_ohm + sweep[0].rho_xy_ohm) / 2.0;
        assert!(close(odd_xx, -0.01 * ideal.rho_xy_ohm, 1e-12));
        assert!(close(even_xy, 0.02 * ideal.rho_xx_ohm_sq, 1e-12));
    }

    #[test]
    fn tensor_refuses_unphysical_carriers() {
        assert!(conductivity_tensor(&[], 1.0).is_err());
        assert!(conductivity_tensor(&[Carrier::electron(-1e15, 0.1)], 1.0).is_err());
        assert!(conductivity_tensor(&[Carrier::hole(1e15, 0.0)], 1.0).is_err());
        assert!(conductivity_tensor(&[Carrier::hole(1e15, f64::NAN)], 1.0).is_err());
        assert!(conductivity_tensor(&[Carrier::hole(1e15, 0.1)], f64::INFINITY).is_err());
        assert!(Carrier::from_volume_density(CarrierKind::Hole, 1e22, 0.1, 0.0).is_err());
        let noisy = SweepNoise {
            absolute_ohm: -1.0,
            relative: 0.0,
        };
        let carriers = [Carrier::hole(1e15, 0.1)];
        assert!(synthetic_sweep(
            &carriers,
            &[1.0],
            &noisy,
            &SweepImperfections::default(),
            &mut Rng::seeded(0)
        )
        .is_err());
        assert!(symmetric_fields(0.0, 3).is_err());
        assert!(symmetric_fields(1.0, 0).is_err());
    }
}
