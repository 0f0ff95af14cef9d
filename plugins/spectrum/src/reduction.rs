//! Reduction of a long, continuously logged field sweep onto a field grid before the
//! analyses, so that their cost and memory stay bounded as the sweep grows.
//!
//! # When it applies
//!
//! A sweep of more than [`REDUCTION_THRESHOLD`] readings (a magnet ramp logged at 10 Hz has
//! 10,000 to 40,000). Shorter sweeps, the usual setpoint sweeps of a few hundred fields, are
//! analysed as measured, unchanged. Without the reduction the envelope of `spectrum.mobility`
//! needs a dense 2N x 2N matrix of the N symmetrized fields (memory N^2, time N^3): 2 GB and
//! minutes at N = 8,000.
//!
//! # The grid
//!
//! Bins in |B|, the same for both field signs: linear of width delta B_0 from 0 to B_0 =
//! B_max / 100, then geometric with edges B_0 (1 + delta)^k up to B_max, delta =
//! [`RELATIVE_BIN_WIDTH`]. A bin holding fewer than [`MIN_READINGS_PER_BIN`] readings of
//! a field sign that it reaches is merged with the next. Readings at zero field (within the
//! zero-field tolerance) are kept as measured (with stated uncertainties) or averaged into
//! one point (without).
//!
//! # Why the information is kept
//!
//! The model tensor of a carrier of mobility mu depends on the field through x = mu B as
//! the Lorentzians 1 / (1 + x^2) and x / (1 + x^2) (Beck and Anderson, J. Appl. Phys. 62,
//! 541, 1987), and so does the resistivity, a rational function of them. In each bin and
//! field sign rho_xx and rho_xy are fitted by a straight line in |B| (ordinary least
//! squares), evaluated at the centroid of the bin's fields, the same field for both signs so
//! that the symmetrization pairs them without interpolating. A straight line reproduces the
//! constant and linear parts of the curve exactly; what the bin loses is its curvature,
//! f''(B) Var(B) / 2 at the centroid. For a geometric bin of relative width delta that is at
//! most 0.03 delta^2 of the carrier's share of the tensor (x^2 |f''(x)| <= 0.75 for the
//! Lorentzians, Var = (delta B)^2 / 12), 7e-6 at delta = 1.5 %; below B_0 it is at most
//! (mu B_0 delta)^2 / 12, as small for every carrier whose magnetoresistance the sweep
//! resolves (mu B_0 <= 1). The noise of a bin's value is that of its readings divided by
//! about sqrt(n): the reduction keeps the information of the readings (every reading
//! enters one bin with its weight) and adds an error well below the noise of the bins.
//!
//! Each bin value carries its propagated standard uncertainty: the value is a linear
//! combination sum w_i y_i of the readings, so its variance is sum w_i^2 u_i^2 with the
//! stated uncertainties u_i (and the covariance of rho_xx and rho_xy alike), or, when none
//! are stated, s^2 sum w_i^2 with s^2 the residual variance about the bins' lines, pooled
//! over neighbouring bins of the same sign until it has 20 degrees of freedom (the noise
//! changes slowly with field; a bin's own few readings would make its weight as noisy as
//! their scatter). The analyses then weight the bins by these uncertainties. When the
//! readings are noise-free (a pooled scatter of zero somewhere) no uncertainties are
//! attached, as for the readings themselves.
//!
//! A bin is never wider than the grid says merely to gather readings: it is merged with the
//! next only while a sign in it has fewer than [`MIN_READINGS_PER_BIN`] (3, a line and one
//! degree of freedom), which happens only where the readings are sparser than the bins, so
//! that the curvature bound above holds wherever the reduction averages.

use mobilis_physics::sweep::{ResistivityUncertainty, SweepPoint};

/// Sweeps with more readings than this are reduced.
pub const REDUCTION_THRESHOLD: usize = 2000;
/// Relative width of the geometric bins (and, times B_0, the width of the linear ones).
pub const RELATIVE_BIN_WIDTH: f64 = 0.015;
/// The linear bins reach up to this fraction of the largest |B|.
const LINEAR_PART: f64 = 0.01;
/// Fewest readings of a field sign in a bin: enough for a line and one degree of freedom
/// of scatter (the noise estimate pools neighbouring bins).
pub const MIN_READINGS_PER_BIN: usize = 3;

/// A reduced sweep.
#[derive(Debug, Clone, PartialEq)]
pub struct Reduction {
    /// One point per bin and field sign, plus the zero-field readings, ascending in B.
    pub points: Vec<SweepPoint>,
    /// Readings of the sweep as measured.
    pub readings: usize,
    /// Bins (fields |B| > 0 of the reduced sweep).
    pub bins: usize,
    /// The uncertainties of the bins were estimated from the scatter of the readings (none
    /// were stated).
    pub estimated_uncertainties: bool,
}

impl Reduction {
    /// The warning every analysis of a reduced sweep passes on.
    pub fn note(&self) -> String {
        format!(
            "the sweep of {} readings was reduced onto {} field bins (relative width {:.1} %, each a straight-line fit of its readings with {} uncertainty) before the analysis; see the plugin documentation",
            self.readings,
            self.bins,
            100.0 * RELATIVE_BIN_WIDTH,
            if self.estimated_uncertainties {
                "the scatter-estimated"
            } else {
                "the propagated"
            }
        )
    }
}

/// Reduces `points` when there are more than [`REDUCTION_THRESHOLD`] of them and they are
/// valid (finite, uncertainties on all or none); `None` leaves them to the analysis as they
/// are (which also reports what is invalid).
pub fn reduce(points: &[SweepPoint], zero_field_tolerance_t: f64) -> Option<Reduction> {
    if points.len() <= REDUCTION_THRESHOLD || !(zero_field_tolerance_t.is_finite() && zero_field_tolerance_t >= 0.0) {
        return None;
    }
    let stated = points.iter().filter(|p| p.uncertainty.is_some()).count();
    let finite = points.iter().all(|p| {
        p.field_t.is_finite()
            && p.rho_xx_ohm_sq.is_finite()
            && p.rho_xy_ohm.is_finite()
            && p.uncertainty
                .is_none_or(|u| u.rho_xx_ohm_sq.is_finite() && u.rho_xy_ohm.is_finite() && u.correlation.is_finite())
    });
    if !finite || (stated != 0 && stated != points.len()) {
        return None;
    }
    let max_field = points.iter().map(|p| p.field_t.abs()).fold(0.0f64, f64::max);
    if max_field <= zero_field_tolerance_t {
        return None;
    }
    let linear_end = LINEAR_PART * max_field;
    let linear_bins = (1.0 / RELATIVE_BIN_WIDTH).round();
    let growth = RELATIVE_BIN_WIDTH.ln_1p();
    let bin_of = |b: f64| -> usize {
        if b < linear_end {
            (b / linear_end * linear_bins) as usize
        } else {
            linear_bins as usize + ((b / linear_end).ln() / growth) as usize
        }
    };
    let bin_count = bin_of(max_field) + 1;
    // Readings of each sign per bin (indices into `points`).
    let mut members: [Vec<Vec<usize>>; 2] = [vec![Vec::new(); bin_count], vec![Vec::new(); bin_count]];
    let mut zero = Vec::new();
    for (index, point) in points.iter().enumerate() {
        let b = point.field_t.abs();
        if b <= zero_field_tolerance_t {
            zero.push(*point);
        } else {
            let sign = usize::from(point.field_t < 0.0);
            members[sign][bin_of(b).min(bin_count - 1)].push(index);
        }
    }

    // Merge consecutive bins until every sign present in the group has enough readings.
    let mut groups: Vec<[Vec<usize>; 2]> = Vec::new();
    let mut current: [Vec<usize>; 2] = [Vec::new(), Vec::new()];
    for (first, second) in members[0].iter().zip(&members[1]) {
        current[0].extend_from_slice(first);
        current[1].extend_from_slice(second);
        let enough = current.iter().all(|m| m.is_empty() || m.len() >= MIN_READINGS_PER_BIN);
        if enough && current.iter().any(|m| !m.is_empty()) {
            groups.push(std::mem::take(&mut current));
        }
    }
    if current.iter().any(|m| !m.is_empty()) {
        match groups.last_mut() {
            Some(last) => {
                for (kept, rest) in last.iter_mut().zip(&mut current) {
                    kept.append(rest);
                }
            }
            None => groups.push(current),
        }
    }

    let with_stated = stated != 0;
    let mut reduced: Vec<SweepPoint> = Vec::with_capacity(2 * groups.len() + zero.len());
    // Per field sign, the bins in field order with their residual scatter, for the pooled
    // estimate of the noise when no uncertainties are stated.
    let mut fits: [Vec<BinFit>; 2] = [Vec::new(), Vec::new()];
    let mut kept_as_measured = Vec::new();
    for group in &groups {
        let count = group[0].len() + group[1].len();
        let centroid = group.iter().flatten().map(|&i| points[i].field_t.abs()).sum::<f64>() / count as f64;
        for (sign, indices) in group.iter().enumerate() {
            let readings: Vec<&SweepPoint> = indices.iter().map(|&i| &points[i]).collect();
            if readings.is_empty() {
                continue;
            }
            if readings.len() < MIN_READINGS_PER_BIN {
                // Too few for a line and its scatter (only in a sweep too short to merge
                // into bins): kept as measured.
                kept_as_measured.extend(readings.iter().map(|p| **p));
                continue;
            }
            fits[sign].push(line_fit(&readings, centroid, if sign == 0 { 1.0 } else { -1.0 }));
        }
    }
    if with_stated {
        for fit in fits.iter().flatten() {
            reduced.push(fit.point);
        }
        reduced.extend(kept_as_measured);
        reduced.extend(zero);
    } else {
        let pooled: Vec<Option<ResistivityUncertainty>> =
            fits.iter().flat_map(|sign| pooled_uncertainties(sign)).collect();
        let noise_free = pooled.iter().any(|u| u.is_none());
        for (fit, uncertainty) in fits.iter().flatten().zip(&pooled) {
            reduced.push(SweepPoint {
                uncertainty: if noise_free { None } else { *uncertainty },
                ..fit.point
            });
        }
        if noise_free {
            // Noise-free readings: no point gets an uncertainty, as no reading had one.
            reduced.extend(kept_as_measured);
            reduced.extend(zero);
        } else if zero.len() >= MIN_READINGS_PER_BIN {
            // Every point needs an uncertainty now: the zero-field readings become one point
            // whose uncertainty is estimated from their own scatter (the few readings kept
            // as measured, with none known, are left out).
            let refs: Vec<&SweepPoint> = zero.iter().collect();
            let fit = line_fit(&refs, 0.0, 1.0);
            if let Some(u) = pooled_uncertainties(std::slice::from_ref(&fit))[0] {
                reduced.push(SweepPoint {
                    field_t: 0.0,
                    uncertainty: Some(u),
                    ..fit.point
                });
            }
        }
    }
    reduced.sort_by(|a, b| a.field_t.total_cmp(&b.field_t));
    let bins = groups.len();
    Some(Reduction {
        points: reduced,
        readings: points.len(),
        bins,
        estimated_uncertainties: !with_stated,
    })
}

/// Degrees of freedom the pooled noise estimate of a bin gathers from its neighbours (of
/// the same field sign) at least: a variance estimated with 20 has a relative standard
/// deviation of sqrt(2 / 20) = 32 %, so weights built on it stay close to the true ones.
const POOLED_DEGREES: f64 = 20.0;

/// One bin and field sign: its value at the shared field and what its scatter says.
#[derive(Debug, Clone, Copy)]
struct BinFit {
    /// With the propagated uncertainty when the readings state theirs.
    point: SweepPoint,
    /// Residual sums of squares (xx, xy) and cross products about the bin's lines.
    residual_xx: f64,
    residual_xy: f64,
    residual_cross: f64,
    degrees: f64,
    /// sum w_i^2 of the bin value's weights: its variance over the readings' variance.
    weight_square_sum: f64,
}

/// The uncertainties of a field sign's bins from the residual scatter about their lines,
/// pooled over neighbouring bins until [`POOLED_DEGREES`] are reached (the noise varies
/// slowly with field, and a bin of a few readings alone would give a weight as noisy as its
/// scatter); `None` where the pooled scatter vanishes (noise-free readings).
fn pooled_uncertainties(bins: &[BinFit]) -> Vec<Option<ResistivityUncertainty>> {
    (0..bins.len())
        .map(|i| {
            let (mut low, mut high) = (i, i + 1);
            let sum = |low: usize, high: usize, f: &dyn Fn(&BinFit) -> f64| bins[low..high].iter().map(f).sum::<f64>();
            while sum(low, high, &|b| b.degrees) < POOLED_DEGREES && (low > 0 || high < bins.len()) {
                low = low.saturating_sub(1);
                high = (high + 1).min(bins.len());
            }
            let degrees = sum(low, high, &|b| b.degrees);
            let (xx, xy, cross) = (
                sum(low, high, &|b| b.residual_xx),
                sum(low, high, &|b| b.residual_xy),
                sum(low, high, &|b| b.residual_cross),
            );
            let scale = bins[i].weight_square_sum / degrees;
            (degrees > 0.0 && xx > 0.0 && xy > 0.0).then(|| uncertainty_of(xx * scale, xy * scale, cross * scale))
        })
        .collect()
}

/// The straight-line fit of rho_xx and rho_xy against |B| of `readings` (at least 3)
/// evaluated at `centroid`, given the field sign `sign`, with the stated uncertainties
/// propagated when the readings carry them, and the residual scatter about the lines.
fn line_fit(readings: &[&SweepPoint], centroid: f64, sign: f64) -> BinFit {
    let n = readings.len() as f64;
    let mean_b = readings.iter().map(|p| p.field_t.abs()).sum::<f64>() / n;
    let sxx: f64 = readings.iter().map(|p| (p.field_t.abs() - mean_b).powi(2)).sum();
    // Ordinary least squares: the value at c is sum w_i y_i with w_i = 1/n + (c - mean)
    // (b_i - mean) / Sxx; with all fields equal, the plain mean.
    let weights: Vec<f64> = readings
        .iter()
        .map(|p| {
            if sxx > 0.0 {
                1.0 / n + (centroid - mean_b) * (p.field_t.abs() - mean_b) / sxx
            } else {
                1.0 / n
            }
        })
        .collect();
    let value = |y: &dyn Fn(&SweepPoint) -> f64| -> f64 { readings.iter().zip(&weights).map(|(p, w)| w * y(p)).sum() };
    let rho_xx = value(&|p| p.rho_xx_ohm_sq);
    let rho_xy = value(&|p| p.rho_xy_ohm);
    let weight_square_sum: f64 = weights.iter().map(|w| w * w).sum();
    let stated = readings.iter().all(|p| p.uncertainty.is_some()).then(|| {
        let (mut var_xx, mut var_xy, mut cov) = (0.0, 0.0, 0.0);
        for (p, w) in readings.iter().zip(&weights) {
            let u = p.uncertainty.expect("all readings carry uncertainties");
            var_xx += w * w * u.rho_xx_ohm_sq * u.rho_xx_ohm_sq;
            var_xy += w * w * u.rho_xy_ohm * u.rho_xy_ohm;
            cov += w * w * u.correlation * u.rho_xx_ohm_sq * u.rho_xy_ohm;
        }
        uncertainty_of(var_xx, var_xy, cov)
    });
    let line = |y: &dyn Fn(&SweepPoint) -> f64| -> (f64, f64) {
        let mean_y = readings.iter().map(|p| y(p)).sum::<f64>() / n;
        let slope = if sxx > 0.0 {
            readings
                .iter()
                .map(|p| (p.field_t.abs() - mean_b) * (y(p) - mean_y))
                .sum::<f64>()
                / sxx
        } else {
            0.0
        };
        (mean_y, slope)
    };
    let (mean_xx, slope_xx) = line(&|p| p.rho_xx_ohm_sq);
    let (mean_xy, slope_xy) = line(&|p| p.rho_xy_ohm);
    let (mut residual_xx, mut residual_xy, mut residual_cross) = (0.0, 0.0, 0.0);
    for p in readings {
        let db = p.field_t.abs() - mean_b;
        let r_xx = p.rho_xx_ohm_sq - mean_xx - slope_xx * db;
        let r_xy = p.rho_xy_ohm - mean_xy - slope_xy * db;
        residual_xx += r_xx * r_xx;
        residual_xy += r_xy * r_xy;
        residual_cross += r_xx * r_xy;
    }
    BinFit {
        point: SweepPoint {
            field_t: sign * centroid,
            rho_xx_ohm_sq: rho_xx,
            rho_xy_ohm: rho_xy,
            uncertainty: stated,
        },
        residual_xx,
        residual_xy,
        residual_cross,
        degrees: if sxx > 0.0 { n - 2.0 } else { n - 1.0 },
        weight_square_sum,
    }
}

fn uncertainty_of(var_xx: f64, var_xy: f64, cov: f64) -> ResistivityUncertainty {
    let (sd_xx, sd_xy) = (var_xx.max(0.0).sqrt(), var_xy.max(0.0).sqrt());
    let correlation = if sd_xx > 0.0 && sd_xy > 0.0 {
        (cov / (sd_xx * sd_xy)).clamp(-0.999, 0.999)
    } else {
        0.0
    };
    ResistivityUncertainty {
        rho_xx_ohm_sq: sd_xx,
        rho_xy_ohm: sd_xy,
        correlation,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::mobility_spectrum::{mobility_spectrum_of_sweep, SpectrumSettings, Unmonitored};
    use crate::multi_carrier::{fit_sweep, CarrierSelection, FittedCarrier, MultiCarrierSettings};
    use mobilis_numerics::noise::Rng;
    use mobilis_physics::forward::tensor::{
        conductivity_tensor, synthetic_sweep, Carrier, CarrierKind, SweepImperfections, SweepNoise,
    };
    use mobilis_physics::sweep::SymmetrizeSettings;

    /// A ramp from -14 T to 14 T logged `readings` times: noise `relative` |rho| plus a
    /// tenth of that of the zero-field rho_xx, stated on every reading, and a Hall
    /// misalignment for the symmetrization to remove.
    fn ramp(carriers: &[Carrier], readings: usize, relative: f64, seed: u64) -> Vec<SweepPoint> {
        let fields: Vec<f64> = (0..readings)
            .map(|i| -14.0 + 28.0 * i as f64 / (readings - 1) as f64)
            .collect();
        let rho_0 = 1.0 / conductivity_tensor(carriers, 0.0).unwrap().sigma_xx_s;
        let noise = SweepNoise {
            absolute_ohm: 0.1 * relative * rho_0,
            relative,
        };
        let imperfections = SweepImperfections {
            hall_misalignment: 0.01,
            longitudinal_hall_pickup: 0.0,
        };
        synthetic_sweep(carriers, &fields, &noise, &imperfections, &mut Rng::seeded(seed)).unwrap()
    }

    fn carriers() -> [Carrier; 2] {
        [Carrier::electron(9e16, 1.5), Carrier::hole(5e17, 0.05)]
    }

    #[test]
    fn reduction_applies_to_long_sweeps_only() {
        let short = ramp(&carriers(), REDUCTION_THRESHOLD, 1e-3, 1);
        assert!(reduce(&short, 1e-4).is_none());
        let long = ramp(&carriers(), REDUCTION_THRESHOLD + 1, 1e-3, 1);
        let reduced = reduce(&long, 1e-4).expect("a long sweep is reduced");
        assert_eq!(reduced.readings, REDUCTION_THRESHOLD + 1);
        assert!(reduced.points.len() < long.len() / 2, "{} points", reduced.points.len());
        assert!(reduced.points.iter().all(|p| p.uncertainty.is_some()));
        assert!(!reduced.estimated_uncertainties);
    }

    #[test]
    fn bins_reproduce_a_straight_line_at_their_fields_and_pair_the_signs() {
        // rho_xx even and linear in |B|, rho_xy odd: every bin's line is exact, and both
        // signs of a bin land on the same |B|, so the symmetrization needs no interpolation.
        let points: Vec<SweepPoint> = (0..5000)
            .map(|i| {
                let b = -10.0 + 20.0 * i as f64 / 4999.0;
                SweepPoint::new(b, 100.0 + 3.0 * b.abs(), 5.0 * b)
            })
            .collect();
        let reduced = reduce(&points, 1e-4).unwrap();
        for p in &reduced.points {
            let expected_xx = 100.0 + 3.0 * p.field_t.abs();
            assert!((p.rho_xx_ohm_sq / expected_xx - 1.0).abs() < 1e-12, "{p:?}");
            assert!(
                (p.rho_xy_ohm - 5.0 * p.field_t).abs() < 1e-10 * p.field_t.abs().max(1.0),
                "{p:?}"
            );
        }
        let positive: Vec<f64> = reduced
            .points
            .iter()
            .filter(|p| p.field_t > 0.0)
            .map(|p| p.field_t)
            .collect();
        let mut negative: Vec<f64> = reduced
            .points
            .iter()
            .filter(|p| p.field_t < 0.0)
            .map(|p| -p.field_t)
            .collect();
        negative.reverse();
        assert_eq!(positive, negative);
        assert_eq!(positive.len(), reduced.bins);
    }

    #[test]
    fn bin_uncertainties_are_propagated_or_estimated_from_the_scatter() {
        // 20,000 readings of 1 % noise: the bins carry about 1 % / sqrt(readings per bin),
        // whether stated on the readings or estimated from their scatter.
        let stated = ramp(&carriers(), 20_000, 1e-2, 7);
        let unstated: Vec<SweepPoint> = stated
            .iter()
            .map(|p| SweepPoint {
                uncertainty: None,
                ..*p
            })
            .collect();
        let a = reduce(&stated, 1e-4).unwrap();
        let b = reduce(&unstated, 1e-4).unwrap();
        assert!(b.estimated_uncertainties && !a.estimated_uncertainties);
        assert_eq!(a.bins, b.bins);
        let ratios: Vec<f64> = a
            .points
            .iter()
            .zip(&b.points)
            .filter(|(p, _)| p.field_t.abs() > 1e-4)
            .map(|(p, q)| q.uncertainty.unwrap().rho_xx_ohm_sq / p.uncertainty.unwrap().rho_xx_ohm_sq)
            .collect();
        let mean = ratios.iter().sum::<f64>() / ratios.len() as f64;
        // The scatter estimate has few degrees of freedom per bin but is unbiased in the
        // variance: its mean ratio is close to 1.
        assert!((mean - 1.0).abs() < 0.1, "mean ratio {mean}");
    }

    fn matching<'a>(fitted: &'a [FittedCarrier], truth: &Carrier) -> &'a FittedCarrier {
        fitted
            .iter()
            .filter(|c| c.kind == truth.kind)
            .min_by(|a, b| {
                let distance = |c: &FittedCarrier| (c.mobility_m2_per_vs / truth.mobility_m2_per_vs).ln().abs();
                distance(a).total_cmp(&distance(b))
            })
            .unwrap()
    }

    #[test]
    fn multi_carrier_results_on_a_reduced_long_sweep_agree_with_the_full_sweep_within_their_uncertainties() {
        let truth = carriers();
        let sweep = ramp(&truth, 2400, 1e-3, 11);
        let settings = MultiCarrierSettings {
            selection: CarrierSelection::Kinds(vec![CarrierKind::Electron, CarrierKind::Hole]),
            ..MultiCarrierSettings::default()
        };
        let symmetrize = SymmetrizeSettings::default();
        let full = fit_sweep(&sweep, &symmetrize, &settings).unwrap().fit;
        let reduced_sweep = reduce(&sweep, symmetrize.zero_field_tolerance_t).unwrap();
        let reduced = fit_sweep(&reduced_sweep.points, &symmetrize, &settings).unwrap().fit;
        for carrier in &truth {
            let (f, r) = (matching(&full.carriers, carrier), matching(&reduced.carriers, carrier));
            for (name, full_value, full_unc, reduced_value, reduced_unc, true_value) in [
                (
                    "density",
                    f.sheet_density_m2,
                    f.sheet_density_budget.stat.unwrap(),
                    r.sheet_density_m2,
                    r.sheet_density_budget.stat.unwrap(),
                    carrier.sheet_density_m2,
                ),
                (
                    "mobility",
                    f.mobility_m2_per_vs,
                    f.mobility_budget.stat.unwrap(),
                    r.mobility_m2_per_vs,
                    r.mobility_budget.stat.unwrap(),
                    carrier.mobility_m2_per_vs,
                ),
            ] {
                let message = format!(
                    "{:?} {name}: full {full_value:.6e} +- {full_unc:.2e}, reduced {reduced_value:.6e} +- {reduced_unc:.2e}, true {true_value:.6e}",
                    carrier.kind
                );
                // The two use the same readings, so they differ by much less than either's
                // uncertainty; each is within three of its own uncertainties of the truth.
                assert!(
                    (full_value - reduced_value).abs() <= full_unc.max(reduced_unc),
                    "{message}"
                );
                assert!((reduced_value - true_value).abs() <= 3.0 * reduced_unc, "{message}");
                assert!((full_value - true_value).abs() <= 3.0 * full_unc, "{message}");
                // No information is lost: the reduced fit is about as precise.
                assert!(reduced_unc <= 1.5 * full_unc, "{message}");
            }
        }
    }

    #[test]
    fn mobility_spectrum_of_a_reduced_long_sweep_recovers_the_carriers_within_their_uncertainties() {
        let truth = carriers();
        let sweep = ramp(&truth, 20_000, 1e-3, 13);
        let symmetrize = SymmetrizeSettings::default();
        let reduced = reduce(&sweep, symmetrize.zero_field_tolerance_t).unwrap();
        assert!(reduced.points.len() < 1000, "{} points", reduced.points.len());
        let settings = SpectrumSettings {
            points_per_sign: 120,
            ..SpectrumSettings::default()
        };
        let result = mobility_spectrum_of_sweep(&reduced.points, &symmetrize, &settings, &Unmonitored).unwrap();
        for carrier in &truth {
            let peak = result
                .peaks
                .iter()
                .filter(|p| p.carrier == carrier.kind)
                .min_by(|a, b| {
                    let distance = |m: f64| (m / carrier.mobility_m2_per_vs).ln().abs();
                    distance(a.mobility_m2_per_vs).total_cmp(&distance(b.mobility_m2_per_vs))
                })
                .unwrap_or_else(|| panic!("no peak for {carrier:?}: {:?}", result.peaks));
            let message = format!("{carrier:?}: {peak:?}");
            assert!(
                (peak.mobility_m2_per_vs - carrier.mobility_m2_per_vs).abs() <= 3.0 * peak.mobility_unc_m2_per_vs,
                "{message}"
            );
            assert!(
                (peak.sheet_density_m2 - carrier.sheet_density_m2).abs() <= 3.0 * peak.sheet_density_unc_m2,
                "{message}"
            );
        }
    }
}
