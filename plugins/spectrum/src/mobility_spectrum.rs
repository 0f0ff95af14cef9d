//! `spectrum.mobility`: the mobility spectrum of a symmetrized field sweep, for electrons
//! and holes on a logarithmic mobility grid. Two spectra are computed: the Beck-Anderson
//! envelope (an upper bound) and the regularized spectrum, a smooth non-negative one whose
//! peaks are integrated into a sheet density and a mean mobility each.
//!
//! Pure computation: no DataFrames, no I/O. The plugin's table glue turns the `sweep` role
//! into [`TensorPoint`]s (`mobilis_physics::sweep`: symmetrize in field, then invert the
//! resistivity tensor; [`mobility_spectrum_of_sweep`] does both) and the
//! [`MobilitySpectrum`] back into a table and a summary. Progress and cancellation come in
//! through a [`Monitor`], which `mobilis_sdk::sdk::Host` implements.
//!
//! # Model
//!
//! Carriers conduct in parallel, each with its own mobility (Beck and Anderson, J. Appl.
//! Phys. 62, 541, 1987). With a distribution of conductance over signed mobility mu
//! (negative for electrons, positive for holes: the sign convention of the contract, in
//! which sigma_xy and rho_xy are positive for holes at positive field),
//!
//! - sigma_xx(B) = integral s(mu) / (1 + mu^2 B^2) dmu,
//! - sigma_xy(B) = integral s(mu) mu B / (1 + mu^2 B^2) dmu,
//!
//! s(mu) = e n(mu) |mu| >= 0 the conductance per unit mobility. The input is the sheet
//! tensor, so conductances are in S and densities per m^2 (a volume tensor in S/m gives
//! densities per m^3 through the same formulas).
//!
//! # Grid and measure
//!
//! The grid is N mobilities per sign, mu_k = mu_min exp(k Delta), Delta = ln(mu_max /
//! mu_min) / (N - 1), the same magnitudes for electrons and holes (by default from
//! 0.1 / B_max to 10 / B_min, B_min the lowest nonzero field). The unknowns are the point
//! conductances x_k >= 0 of a carrier at each grid mobility, so the model tensor is the sum
//! sum_k x_k K(mu_k, B) exactly, with no quadrature error to argue about. As a density on
//! the logarithmic axis they are
//!
//! - spectrum S(mu_k) = dsigma / d ln|mu| = x_k / Delta (S), what is plotted against mu on a
//!   log axis (its area on that axis is the conductance),
//! - density spectrum dn / d ln|mu| = x_k / (Delta e mu_k) (m^-2).
//!
//! # The two spectra
//!
//! - **Envelope** ([`envelope`]): for each mu, the largest conductance of a single carrier
//!   at mu that leaves the rest of the data realizable by a non-negative spectrum: the
//!   Beck-Anderson bound, from the positivity of a Pick-type matrix built from the measured
//!   tensor at all fields, 1 / (a(mu)^H P^-1 a(mu)). With one field it is
//!   sigma_xx(B) (1 + mu^2 B^2); see the submodule for the derivation and for the loading
//!   that makes it robust to noise. It is a point conductance (S), not a density: the most
//!   a delta-like carrier at mu can carry.
//! - **Regularized spectrum** ([`regularized`]): non-negative least squares with a
//!   second-difference penalty in ln|mu|, the constrained-regularization method of
//!   Provencher's CONTIN (S. W. Provencher, Comput. Phys. Commun. 27, 213 and 229, 1982;
//!   details from memory) applied to the Beck-Anderson kernel. It plays the role of the
//!   maximum-entropy and Bayesian spectra of Kiatgamolchai et al. (Phys. Rev. E 66,
//!   036705, 2002) and Chrastina, Hague and Leadley (J. Appl. Phys. 94, 6583, 2003): a
//!   smooth non-negative spectrum that fits the data to within their noise, with the
//!   smoothness chosen by a stated rule, not by the user. Non-negativity is what gives the
//!   spectrum its resolution; the penalty removes the spikes with which an unregularized
//!   non-negative fit chases the noise. (It is called the regularized spectrum throughout:
//!   "quantitative mobility spectrum" names a different published method.)
//!   The penalty strength is chosen ([`RegularizationRule`]) by the discrepancy principle
//!   when the data carry uncertainties (the smoothest spectrum with chi-square at most the
//!   number of data, or one standard deviation above the misfit's floor when a grid's
//!   discretization keeps the fit from reaching it), by the L-curve corner otherwise
//!   (Hansen and O'Leary, SIAM J. Sci. Comput. 14, 1487, 1993), or fixed by the caller
//!   (CONTIN's own choice, an F-test, is not used). Residuals are whitened by the 2 x 2
//!   covariance of each point when it is given, and otherwise divided by |sigma(B)|
//!   (a constant relative error).
//!
//! # Peaks
//!
//! A peak ([`Peak`]) is a local maximum of S(mu) within one sign at or above
//! `peak_threshold` times the largest S of either sign, with its region bounded by the
//! minima on each side (see [`peaks`]). Over the region, with shares f_k (1/2 at a minimum
//! shared with the neighbouring peak):
//!
//! - conductance sigma_p = sum f_k x_k (S);
//! - integrated sheet density n_int = sum f_k x_k / (e mu_k) (m^-2): every grid carrier
//!   counts with its own mobility (the reported density is discussed below);
//! - mobility mu_p = sum f_k x_k mu_k / sigma_p, the conductance-weighted mean: the peak's
//!   low-field Hall mobility. e n_int mu_p >= sigma_p, with equality for a narrow peak; the
//!   difference measures the peak's width (for a log-normal peak with standard deviation w
//!   in ln mu, the ratio is exp(w^2)).
//!
//! Each peak has a carrier type ([`CarrierKind`]); the magnitudes are positive and
//! [`Peak::signed_mobility`] gives the signed value. Also reported: the peak position (the
//! parabolic vertex of S in ln mu), the region's mobility range, the envelope at the top,
//! the share of the total conductance, whether the region reaches the grid's edge (the
//! spectrum wants to continue beyond the grid: a warning says to widen it) and whether the
//! mean mobility lies in the window 1/B_max .. 1/B_min over which the kernel changes shape
//! within the measured fields (a warning when it lies more than a factor 3 outside, where
//! the fields constrain it weakly).
//!
//! **Density of a peak.** The smoothing penalty and the grid give every peak a width, and a
//! spectrum cannot tell that width from a real spread of mobilities. Two densities bound
//! the truth: the integrated density n_int = sum f_k x_k / (e mu_k), exact when the width is
//! real, and the Hall density n_H = sigma_p / (e mu_p), exact for one Drude carrier whose
//! width is all smoothing (the low-field tensor fixes sigma_p and mu_p); n_int >= n_H by
//! Jensen's inequality. The reported density is their midpoint, with (n_int - n_H) /
//! sqrt(12), the standard uncertainty of a value known only to lie between two bounds
//! (JCGM 100:2008, 4.3.7), in its statistical part. For narrow peaks the two differ by a
//! few 1e-3; for a real spread w in ln mu by a factor exp(w^2). The mobility is treated
//! alike, between the Hall mobility mu_p and sigma_p / (e n_int), so that the reported
//! density times the reported mobility stays sigma_p / e to first order. A narrow
//! high-mobility carrier still comes out about 0.1 % (200 grid points per sign) to 0.3 %
//! (80 per sign) high in mobility, beyond this width term and above its bootstrap spread:
//! a bias of the grid and the smoothing that the mobility's uncertainty does not include
//! (the coverage test prints it; the densities' uncertainties do hold).
//!
//! **Uncertainties** come from a parametric bootstrap at the chosen strength: whitened
//! residuals are independent with unit variance, so each replica is the fitted data plus
//! s z, z standard normal (s^2 = max(1, chi^2 / m) with uncertainties, inflated when the
//! fit is worse than they allow; chi^2 / m without, the noise scale estimated from the
//! misfit; times the reading reuse factor when the symmetrized grid holds readings more
//! than once, `multi_carrier::budget`), solved again from the chosen spectrum. Each
//! replica is integrated over the peak's region widened into the empty grid points around
//! it, and the spread of a quantity over the replicas is the normalized median absolute
//! deviation (robust: a replica that moves weight across a region's boundary is an
//! outlier, and a few of them made the plain standard deviation 5 to 50 times the actual
//! scatter in the coverage test). A replica may move weight to other grid points, which a
//! linearization on the fixed set of positive points would miss (it underestimates the
//! mobility's uncertainty several times). Lambda is not chosen again for each replica. The
//! stated calibrations (field and resistivity scale) are applied to each peak after the
//! spectrum as in the multi-carrier fit, and the totals are the quadrature sums. Before the
//! spectrum a stated uncertainty below `relative_uncertainty_floor` |sigma(B)| is raised to
//! it. The seed is fixed, so results repeat.
//!
//! # Progress and cancellation
//!
//! The monitor is asked before every NNLS iteration and every regularization trial, and
//! every 16 envelope mobilities and every bootstrap replica, so a cancel request stops a
//! large grid within one O(p^2) step; the result is then [`SpectrumError::Cancelled`].
//! Progress is reported after each trial (0.02 .. 0.8), during the envelope (0.8 .. 0.9),
//! after each replica (0.9 .. 0.99) and at the end.
//!
//! # Cost
//!
//! With N per sign and M fields: the Gram matrix O(M N^2) once; each trial O(N) to rewrite
//! the band of the penalized matrix (the rest is the Gram matrix, kept in one buffer) plus
//! O(N p) per NNLS iteration for p positive grid points, the gradient read from p rows of
//! the matrix (warm starts keep iterations few);
//! the envelope one Cholesky of size 2M, O(M^3), and O(M^2) per mobility; each bootstrap
//! replica O(M N) plus a warm-started solve.

mod data;
pub mod envelope;
pub mod error;
pub mod peaks;
pub mod regularized;
mod settings;
pub mod summary;
#[cfg(test)]
mod tests;

use mobilis_numerics::noise::Rng;
use mobilis_physics::constants::ELEMENTARY_CHARGE_C;
pub use mobilis_physics::forward::tensor::CarrierKind;

use mobilis_physics::sweep::{conductivity_points, symmetrize, SweepPoint, SymmetrizeSettings, Symmetrized};
pub use mobilis_physics::sweep::{TensorPoint, TensorUncertainty};
use rayon::prelude::*;

pub use crate::monitor::{Monitor, Unmonitored};
use crate::multi_carrier::budget::{floor_uncertainties, reading_reuse_factor, Budget, Calibration};
use data::{kernel, Data, Grid};
use envelope::Envelope;
pub use error::SpectrumError;
use regularized::Problem;
pub use settings::{GridRange, RegularizationRule, RuleUsed, SpectrumSettings, MIN_DISTINCT_FIELDS};

/// One carrier sign's spectra on the grid (index k: mobility `mobility_m2_per_vs[k]`).
#[derive(Debug, Clone, PartialEq)]
pub struct SignSpectrum {
    /// Beck-Anderson bound: the largest conductance of one carrier at this mobility, S.
    pub envelope_s: Vec<f64>,
    /// Regularized spectrum: point conductance x_k of the grid carrier, S.
    pub conductance_s: Vec<f64>,
    /// Regularized spectrum as a density on the log axis, dsigma / d ln|mu| = x_k / Delta, S.
    pub spectrum_s: Vec<f64>,
    /// Sheet density per unit ln|mu|, x_k / (Delta e mu_k), m^-2.
    pub density_m2: Vec<f64>,
}

/// A peak of the regularized spectrum.
#[derive(Debug, Clone, PartialEq)]
pub struct Peak {
    pub carrier: CarrierKind,
    /// Mobility, m^2/(V s): the midpoint of `hall_mobility_m2_per_vs` and
    /// `density_mobility_m2_per_vs`.
    pub mobility_m2_per_vs: f64,
    /// The conductance-weighted mean |mu| over the peak (its low-field Hall mobility).
    pub hall_mobility_m2_per_vs: f64,
    /// sigma_p / (e n_int) (at most the Hall mobility).
    pub density_mobility_m2_per_vs: f64,
    /// Total standard uncertainty (NaN without replicas).
    pub mobility_unc_m2_per_vs: f64,
    pub mobility_budget: Budget,
    /// Sheet density, m^-2: the midpoint of `integrated_density_m2` and `hall_density_m2`.
    pub sheet_density_m2: f64,
    /// Total standard uncertainty (NaN without replicas).
    pub sheet_density_unc_m2: f64,
    /// Its statistical and calibration parts; the statistical part holds the spread over
    /// the replicas and the width term (`integrated_density_m2` - `hall_density_m2`) / sqrt(12)
    /// in quadrature.
    pub sheet_density_budget: Budget,
    /// sum x_k / (e mu_k) over the region, m^-2.
    pub integrated_density_m2: f64,
    /// sigma_p / (e mu_p), m^-2 (at most `integrated_density_m2`).
    pub hall_density_m2: f64,
    /// Conductance of the peak, S.
    pub conductance_s: f64,
    pub conductance_unc_s: f64,
    /// Where the spectrum peaks (parabolic vertex in ln mu), m^2/(V s).
    pub peak_mobility_m2_per_vs: f64,
    /// The lowest and highest grid mobility of the peak's region.
    pub mobility_range_m2_per_vs: (f64, f64),
    /// The envelope at the top of the peak, S.
    pub envelope_s: f64,
    /// The peak's share of the spectrum's total conductance.
    pub conductance_fraction: f64,
    /// The region reaches the first or last grid point.
    pub at_grid_edge: bool,
    /// 1/B_max <= mobility <= 1/B_min.
    pub within_field_window: bool,
}

impl Peak {
    /// The mobility with the carrier's sign: negative for electrons.
    pub fn signed_mobility(&self) -> f64 {
        self.carrier.charge_sign() * self.mobility_m2_per_vs
    }
}

/// One solve of the regularization search.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct RegularizationTrial {
    pub lambda: f64,
    pub chi_square: f64,
    /// ||D u||^2 of the solution (u in units of the largest sigma_xx).
    pub roughness: f64,
}

/// The regularization applied and how it was found.
#[derive(Debug, Clone, PartialEq)]
pub struct Regularization {
    pub rule: RuleUsed,
    /// Dimensionless strength (see [`RegularizationRule::Fixed`]).
    pub lambda: f64,
    /// The penalty weight itself, lambda tr(A^T A) / tr(D^T D).
    pub alpha: f64,
    /// Whitened chi-square of the chosen spectrum (relative units without uncertainties).
    pub chi_square: f64,
    /// Number of whitened data values (2 per nonzero field, 1 per zero field).
    pub data_count: usize,
    pub roughness: f64,
    pub trials: Vec<RegularizationTrial>,
}

/// The data and the tensor of the regularized spectrum at one point.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FitPoint {
    pub field_t: f64,
    pub sigma_xx_s: f64,
    pub sigma_xy_s: f64,
    pub fit_sigma_xx_s: f64,
    pub fit_sigma_xy_s: f64,
}

/// Everything `spectrum.mobility` computes.
#[derive(Debug, Clone, PartialEq)]
pub struct MobilitySpectrum {
    /// The grid magnitudes |mu|, ascending, m^2/(V s).
    pub mobility_m2_per_vs: Vec<f64>,
    /// Delta = ln(mu_{k+1} / mu_k).
    pub log_step: f64,
    pub electron: SignSpectrum,
    pub hole: SignSpectrum,
    /// Electron peaks then hole peaks, each in ascending mobility.
    pub peaks: Vec<Peak>,
    pub regularization: Regularization,
    /// Data and fitted tensor, one per input point, in input order.
    pub fit: Vec<FitPoint>,
    /// The loading tau of the envelope matrix (units of the squared noise scale).
    pub envelope_loading: f64,
    /// Sum of all point conductances, S (compare with sigma_xx at zero field).
    pub total_conductance_s: f64,
    /// Points whose stated uncertainty was raised to the floor.
    pub floored_points: usize,
    /// How many times over the symmetrized grid counts the readings (1 for conductivity
    /// points given directly); the bootstrap noise is widened by its square root.
    pub reading_reuse_factor: f64,
    /// The calibrations applied to the peaks.
    pub calibration: Calibration,
    pub warnings: Vec<String>,
}

/// The mobility spectrum of symmetrized conductivity data (fields >= 0).
pub fn mobility_spectrum(
    points: &[TensorPoint],
    settings: &SpectrumSettings,
    monitor: &dyn Monitor,
) -> Result<MobilitySpectrum, SpectrumError> {
    spectrum_of_points(points, settings, monitor, 1.0)
}

/// The spectrum of independent conductivity points, or of a symmetrized grid that counts
/// the readings `reuse` times over (`multi_carrier::budget::reading_reuse_factor`).
fn spectrum_of_points(
    points: &[TensorPoint],
    settings: &SpectrumSettings,
    monitor: &dyn Monitor,
    reuse: f64,
) -> Result<MobilitySpectrum, SpectrumError> {
    let floor = settings.relative_uncertainty_floor;
    if !(floor.is_finite() && (0.0..0.1).contains(&floor)) {
        return Err(SpectrumError::InvalidSetting {
            setting: "relative_uncertainty_floor",
            value: floor,
            requirement: "give a relative uncertainty of 0 or more and below 0.1 (1e-5 is the default)",
        });
    }
    if let Some((setting, value)) = settings.calibration.invalid() {
        return Err(SpectrumError::InvalidSetting {
            setting,
            value,
            requirement:
                "give a relative standard uncertainty of 0 or more and below 1 (0.002 is 0.2 %), or leave it out",
        });
    }
    let reuse = reuse.max(1.0);
    let (floored, floored_points) = floor_uncertainties(points, floor);
    let points = floored.as_slice();
    if !(settings.peak_threshold > 0.0 && settings.peak_threshold < 1.0) {
        return Err(SpectrumError::InvalidSetting {
            setting: "peak_threshold",
            value: settings.peak_threshold,
            requirement: "give a fraction of the largest spectrum value between 0 and 1 (0.05 is typical)",
        });
    }
    if settings.uncertainty_replicas > 1000 {
        return Err(SpectrumError::InvalidSetting {
            setting: "uncertainty_replicas",
            value: settings.uncertainty_replicas as f64,
            requirement: "give at most 1000 bootstrap replicas (24 is typical)",
        });
    }
    if let RegularizationRule::Fixed(lambda) = settings.rule {
        if !(lambda.is_finite() && lambda > 0.0) {
            return Err(SpectrumError::InvalidSetting {
                setting: "lambda",
                value: lambda,
                requirement: "give a positive regularization strength (1e-8 to 1e-2 is typical)",
            });
        }
    }
    let data = Data::new(points)?;
    let grid = Grid::new(settings, &data)?;
    let n = grid.points_per_sign();
    monitor.progress(0.0, "mobility spectrum: building the kernel");
    if monitor.is_cancelled() {
        return Err(SpectrumError::Cancelled);
    }
    let cancelled = || monitor.is_cancelled();
    let problem = Problem::new(data.design(&grid), data.weighted_values(), n, &cancelled)?;
    monitor.progress(0.02, "mobility spectrum: choosing the regularization");
    let selection = regularized::select(&problem, settings.rule, data.has_uncertainties, monitor, (0.02, 0.8))?;
    let mut warnings = selection.warnings;
    let chosen = selection.chosen;

    let weights: Vec<f64> = chosen.u.iter().map(|u| u * data.reference_s).collect();
    let fitted: Vec<(f64, f64)> = data
        .fields
        .iter()
        .map(|&field| {
            (0..grid.unknowns()).fold((0.0, 0.0), |(xx, xy), j| {
                let (kxx, kxy) = kernel(grid.signed_mobility(j), field);
                (xx + weights[j] * kxx, xy + weights[j] * kxy)
            })
        })
        .collect();

    let envelope = Envelope::new(&data, &fitted, &cancelled)?;
    if envelope.extra_doublings > 0 {
        warnings.push(format!(
            "the envelope matrix needed {} doublings of its loading beyond the fit residuals to be positive definite (rounding); the envelope is slightly looser than the data allow",
            envelope.extra_doublings
        ));
    }
    let mut bounds = vec![0.0; grid.unknowns()];
    for (j, bound) in bounds.iter_mut().enumerate() {
        if j % 16 == 0 {
            if monitor.is_cancelled() {
                return Err(SpectrumError::Cancelled);
            }
            monitor.progress(
                0.8 + 0.1 * j as f64 / grid.unknowns() as f64,
                "mobility spectrum: Beck-Anderson envelope",
            );
        }
        *bound = envelope.bound(grid.signed_mobility(j));
    }

    let sign_spectrum = |offset: usize| SignSpectrum {
        envelope_s: bounds[offset..offset + n].to_vec(),
        conductance_s: weights[offset..offset + n].to_vec(),
        spectrum_s: weights[offset..offset + n].iter().map(|x| x / grid.log_step).collect(),
        density_m2: weights[offset..offset + n]
            .iter()
            .zip(&grid.mobilities)
            .map(|(x, mu)| x / (grid.log_step * ELEMENTARY_CHARGE_C * mu))
            .collect(),
    };
    let electron = sign_spectrum(0);
    let hole = sign_spectrum(n);

    let replicas = Replicas::new(
        &problem,
        &chosen,
        &data,
        settings.uncertainty_replicas,
        reuse,
        monitor,
        (0.9, 0.99),
    )?;
    let largest = electron
        .spectrum_s
        .iter()
        .chain(&hole.spectrum_s)
        .fold(0.0f64, |m, v| m.max(*v));
    let total_conductance_s: f64 = weights.iter().sum();
    let mut found = Vec::new();
    for (carrier, spectrum, offset) in [(CarrierKind::Electron, &electron, 0), (CarrierKind::Hole, &hole, n)] {
        let regions = peaks::find(&spectrum.spectrum_s, settings.peak_threshold * largest);
        for (index, region) in regions.iter().enumerate() {
            let replica_region = peaks::widened(&spectrum.spectrum_s, &regions, index);
            found.push(build_peak(
                carrier,
                (region, &replica_region),
                offset,
                spectrum,
                &grid,
                &data,
                &replicas,
                total_conductance_s,
                &settings.calibration,
            ));
        }
    }
    for peak in &found {
        let kind = peak.carrier.name();
        if peak.at_grid_edge {
            warnings.push(format!(
                "the {kind} peak at {:.4e} cm^2/(V s) reaches the edge of the mobility grid; widen the mobility range so that the whole peak is inside",
                peak.mobility_m2_per_vs * 1e4
            ));
        } else if peak.mobility_m2_per_vs * data.max_field_t < 1.0 / 3.0
            || peak.mobility_m2_per_vs * data.min_nonzero_field_t > 3.0
        {
            warnings.push(format!(
                "the {kind} peak at {:.4e} cm^2/(V s) lies more than a factor 3 outside 1/B_max .. 1/B_min ({:.3e} .. {:.3e} cm^2/(V s)), where the measured fields constrain its mobility weakly; measure to higher fields (low mobility) or at lower fields (high mobility)",
                peak.mobility_m2_per_vs * 1e4,
                1e4 / data.max_field_t,
                1e4 / data.min_nonzero_field_t
            ));
        }
    }
    if floored_points > 0 {
        warnings.push(format!(
            "{floored_points} of {} points had a stated uncertainty below relative_uncertainty_floor = {floor:.1e} of |sigma(B)| and were raised to it; lower relative_uncertainty_floor if the instrument really resolves that finely",
            points.len()
        ));
    }
    if found.is_empty() {
        warnings
            .push("the spectrum has no peak above the threshold; lower peak_threshold or check the data".to_string());
    }

    let fit = data
        .fields
        .iter()
        .zip(&data.sigma)
        .zip(&fitted)
        .map(|((&field_t, &(xx, xy)), &(fxx, fxy))| FitPoint {
            field_t,
            sigma_xx_s: xx,
            sigma_xy_s: xy,
            fit_sigma_xx_s: fxx,
            fit_sigma_xy_s: fxy,
        })
        .collect();
    monitor.progress(1.0, "mobility spectrum: done");
    Ok(MobilitySpectrum {
        mobility_m2_per_vs: grid.mobilities.clone(),
        log_step: grid.log_step,
        electron,
        hole,
        peaks: found,
        regularization: Regularization {
            rule: selection.rule,
            lambda: chosen.lambda,
            alpha: chosen.lambda * problem.scale,
            chi_square: chosen.chi_square,
            data_count: problem.b.len(),
            roughness: chosen.roughness,
            trials: selection
                .trials
                .iter()
                .map(|&(lambda, chi_square, roughness)| RegularizationTrial {
                    lambda,
                    chi_square,
                    roughness,
                })
                .collect(),
        },
        fit,
        envelope_loading: envelope.loading,
        total_conductance_s,
        floored_points,
        reading_reuse_factor: reuse,
        calibration: settings.calibration,
        warnings,
    })
}

/// Symmetrizes a raw sweep (both field signs), converts it to the conductivity tensor and
/// computes its mobility spectrum: the whole path from the `sweep` table's values.
pub fn mobility_spectrum_of_sweep(
    sweep: &[SweepPoint],
    symmetrize_settings: &SymmetrizeSettings,
    settings: &SpectrumSettings,
    monitor: &dyn Monitor,
) -> Result<MobilitySpectrum, SpectrumError> {
    let symmetrized = symmetrize(sweep, symmetrize_settings)?;
    mobility_spectrum_of_symmetrized(sweep, symmetrize_settings, &symmetrized, settings, monitor)
}

/// The spectrum of a sweep its caller has already symmetrized (to report how, for example
/// whether it had one field sign): `sweep` and `symmetrize_settings` are what `symmetrized`
/// was made from, needed to count how often the grid reuses each reading.
pub fn mobility_spectrum_of_symmetrized(
    sweep: &[SweepPoint],
    symmetrize_settings: &SymmetrizeSettings,
    symmetrized: &Symmetrized,
    settings: &SpectrumSettings,
    monitor: &dyn Monitor,
) -> Result<MobilitySpectrum, SpectrumError> {
    let reuse = reading_reuse_factor(sweep, symmetrize_settings, symmetrized);
    spectrum_of_points(&conductivity_points(symmetrized), settings, monitor, reuse)
}

/// The parametric bootstrap of the regularized spectrum (see the module documentation):
/// the point conductances (S) of every replica.
struct Replicas {
    weights: Vec<Vec<f64>>,
}

/// Seed of the bootstrap's noise: fixed, so that a result is reproducible.
const BOOTSTRAP_SEED: u64 = 0x6d6f_6269_6c69_7321;

impl Replicas {
    fn new(
        problem: &Problem,
        chosen: &regularized::Trial,
        data: &Data,
        count: usize,
        reuse: f64,
        monitor: &dyn Monitor,
        progress_range: (f64, f64),
    ) -> Result<Self, SpectrumError> {
        if count == 0 {
            return Ok(Replicas { weights: Vec::new() });
        }
        let m = problem.b.len() as f64;
        let reduced = chosen.chi_square / m;
        // Whitened noise has unit variance with uncertainties (inflated when the fit is
        // worse than they allow); without them its scale is estimated from the misfit.
        // A grid that counts each reading `reuse` times over has noise whose independent
        // share is that much larger than each point's variance says.
        let scale = (if data.has_uncertainties {
            reduced.max(1.0)
        } else {
            reduced
        } * reuse)
            .sqrt();
        let fitted = problem.a.mul_vec(&chosen.u);
        let h = problem.regularized_gram(chosen.lambda);
        // Every replica starts from the chosen spectrum in the same matrix: its passive set
        // is factored once and copied to each.
        let start = problem.warm_start(&h, chosen.lambda, &chosen.u)?;
        // The noise of every replica is drawn first, in replica order, so that the replicas
        // are the same however many of them are solved at once.
        let mut rng = Rng::seeded(BOOTSTRAP_SEED);
        let data_sets: Vec<Vec<f64>> = (0..count)
            .map(|_| fitted.iter().map(|f| f + scale * rng.standard_normal()).collect())
            .collect();
        // The replicas are independent solves: one batch per worker thread at a time, the
        // monitor asked (on this thread) between batches.
        let batch = rayon::current_num_threads().max(1);
        let never = || false;
        let mut weights = Vec::with_capacity(count);
        for (index, chunk) in data_sets.chunks(batch).enumerate() {
            if monitor.is_cancelled() {
                return Err(SpectrumError::Cancelled);
            }
            let solved: Vec<Result<Vec<f64>, SpectrumError>> = chunk
                .par_iter()
                .map(|b| problem.solve_for(&h, chosen.lambda, b, &start, &never))
                .collect();
            for u in solved {
                weights.push(u?.iter().map(|v| v * data.reference_s).collect());
            }
            let (from, to) = progress_range;
            let done = (index * batch + chunk.len()) as f64;
            monitor.progress(
                from + (to - from) * done / count as f64,
                "mobility spectrum: uncertainties",
            );
        }
        Ok(Replicas { weights })
    }

    /// The statistical uncertainty of `quantity(weights)`: its robust spread over the
    /// replicas, the normalized median absolute deviation 1.4826 median |q - median q|
    /// (F. R. Hampel, J. Am. Stat. Assoc. 69, 383, 1974: the standard deviation for a
    /// normal distribution). NaN with fewer than two replicas.
    ///
    /// Why robust: a replica whose noise moves a peak's weight across the minimum that
    /// bounds its region, or splits the peak, gives an outlier many times the typical
    /// deviation, and a few of those among 24 replicas made the plain standard deviation 5
    /// to 50 times the actual scatter of the peak densities in a coverage test.
    fn uncertainty(&self, quantity: impl Fn(&[f64]) -> f64) -> f64 {
        let mut values: Vec<f64> = self
            .weights
            .iter()
            .map(|w| quantity(w))
            .filter(|v| v.is_finite())
            .collect();
        if values.len() < 2 {
            return f64::NAN;
        }
        let median = median_of(&mut values);
        let mut deviations: Vec<f64> = values.iter().map(|v| (v - median).abs()).collect();
        MAD_TO_STANDARD_DEVIATION * median_of(&mut deviations)
    }
}

/// 1 / Phi^-1(3/4): the normalized MAD equals the standard deviation of a normal
/// distribution (Hampel 1974).
const MAD_TO_STANDARD_DEVIATION: f64 = 1.482_602_218_505_602;

/// The median of `values` (sorted in place; not empty).
fn median_of(values: &mut [f64]) -> f64 {
    values.sort_by(f64::total_cmp);
    let n = values.len();
    if n % 2 == 1 {
        values[n / 2]
    } else {
        0.5 * (values[n / 2 - 1] + values[n / 2])
    }
}

/// Conductance, sheet density and conductance-weighted mean mobility of a peak region in
/// the point conductances `x` of one sign's unknowns (offset applied by the caller).
fn integrate(region: &peaks::Region, x: &[f64], mobilities: &[f64]) -> (f64, f64, f64) {
    let conductance: f64 = region.members.iter().map(|&(k, f)| f * x[k]).sum();
    let density: f64 = region
        .members
        .iter()
        .map(|&(k, f)| f * x[k] / (ELEMENTARY_CHARGE_C * mobilities[k]))
        .sum();
    let weighted: f64 = region.members.iter().map(|&(k, f)| f * x[k] * mobilities[k]).sum();
    (conductance, density, weighted / conductance)
}

#[allow(clippy::too_many_arguments)]
fn build_peak(
    carrier: CarrierKind,
    (region, replica_region): (&peaks::Region, &peaks::Region),
    offset: usize,
    spectrum: &SignSpectrum,
    grid: &Grid,
    data: &Data,
    replicas: &Replicas,
    total_conductance_s: f64,
    calibration: &Calibration,
) -> Peak {
    let mu = &grid.mobilities;
    let (conductance, density, mean) = integrate(region, &spectrum.conductance_s, mu);
    let n = mu.len();
    // Replicas are integrated over the region widened into the empty grid points around it,
    // so that weight a replica moves just outside the chosen spectrum's support still
    // counts (see `peaks::widened`).
    let of_replica = |w: &[f64]| integrate(replica_region, &w[offset..offset + n], mu);
    let conductance_unc = replicas.uncertainty(|w| of_replica(w).0);
    // The peak's density lies between its integrated density (exact when its width is
    // real) and its Hall density sigma_p / (e mu_p) (exact for one Drude carrier whose
    // width is all smoothing and grid), and its mobility between the conductance-weighted
    // mean mu_p and sigma_p / (e n_int); see the module documentation.
    let bounds = |(g, n_int, mu_p): (f64, f64, f64)| {
        let e = ELEMENTARY_CHARGE_C;
        ((n_int, g / (e * mu_p)), (mu_p, g / (e * n_int)))
    };
    let midpoint = |(high, low): (f64, f64)| 0.5 * (high + low);
    let width = |(high, low): (f64, f64)| (high - low).abs() / 12f64.sqrt();
    let (density_bounds, mobility_bounds) = bounds((conductance, density, mean));
    let (integrated, hall) = density_bounds;
    let density = midpoint(density_bounds);
    let density_unc = replicas
        .uncertainty(|w| midpoint(bounds(of_replica(w)).0))
        .hypot(width(density_bounds));
    let hall_mobility = mean;
    let mean = midpoint(mobility_bounds);
    let mobility_unc = replicas
        .uncertainty(|w| midpoint(bounds(of_replica(w)).1))
        .hypot(width(mobility_bounds));

    let top = region.top;
    let vertex = mu[top] * (peaks::parabolic_offset(&spectrum.spectrum_s, top) * grid.log_step).exp();
    let first = region.members.first().map_or(top, |m| m.0);
    let last = region.members.last().map_or(top, |m| m.0);
    let at_grid_edge = first == 0 || last + 1 == mu.len();
    let within_field_window = mean * data.max_field_t >= 1.0 && mean * data.min_nonzero_field_t <= 1.0;
    let mobility_budget = Budget::new(mean, Some(mobility_unc), calibration.mobility_relative());
    let sheet_density_budget = Budget::new(density, Some(density_unc), calibration.density_relative());
    let total = |budget: &Budget| budget.total().unwrap_or(f64::NAN);
    Peak {
        carrier,
        mobility_m2_per_vs: mean,
        mobility_unc_m2_per_vs: total(&mobility_budget),
        mobility_budget,
        sheet_density_m2: density,
        sheet_density_unc_m2: total(&sheet_density_budget),
        sheet_density_budget,
        integrated_density_m2: integrated,
        hall_density_m2: hall,
        hall_mobility_m2_per_vs: hall_mobility,
        density_mobility_m2_per_vs: mobility_bounds.1,
        conductance_s: conductance,
        conductance_unc_s: conductance_unc,
        peak_mobility_m2_per_vs: vertex,
        mobility_range_m2_per_vs: (mu[first], mu[last]),
        envelope_s: spectrum.envelope_s[top],
        conductance_fraction: if total_conductance_s > 0.0 {
            conductance / total_conductance_s
        } else {
            0.0
        },
        at_grid_edge,
        within_field_window,
    }
}
