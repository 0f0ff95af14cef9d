//! Field sweeps of the resistivity tensor: symmetrization in field, conversion between the
//! resistivity and the conductivity tensor, and sheet against volume quantities. Shared by
//! the multi-carrier and the magnetoresistance analyses.
//!
//! A sweep is a list of [`SweepPoint`]s, one per measured field: sheet rho_xx (ohm per
//! square) and rho_xy (ohm, positive for holes at positive field), as in the `sweep` table,
//! optionally with standard uncertainties.
//!
//! # Why symmetrize
//!
//! By Onsager's reciprocity the true rho_xx is even and the true rho_xy odd in B. A real
//! sample adds parts of the wrong parity: Hall contacts that are not on one equipotential
//! put a fraction of rho_xx into rho_xy (even in B), and longitudinal contacts that are not
//! aligned with the current put a fraction of rho_xy into rho_xx (odd in B). Taking the even
//! part of rho_xx and the odd part of rho_xy removes both, and the parts removed measure the
//! misalignment.
//!
//! # Steps of [`symmetrize`]
//!
//! 1. **Validation.** Every field, rho_xx and rho_xy finite; rho_xx > 0 (a passive sample
//!    dissipates); uncertainties on every point or on none, each finite and positive, their
//!    correlation in (-1, 1). Errors name the 0-based point.
//! 2. **Branches.** Points with |B| <= `zero_field_tolerance_t` are zero field (see "Zero
//!    field" below); their mean is one node at B = 0 that belongs to both branches. The
//!    others form the positive and the negative branch, each indexed by |B|. A sweep with
//!    nonzero fields of one sign only is used as measured (see "One field sign"); a sweep
//!    with zero-field points only is refused.
//! 3. **Repeats.** Within a branch, points sorted by |B| are grouped around anchors: a group
//!    starts at its lowest |B| and takes every following point within `field_resolution_t`
//!    of that anchor; the next point starts the next group. Each group becomes one node: the
//!    means of |B|, rho_xx and rho_xy, with an uncertainty that also reflects how far its
//!    readings disagree (see "Repeated readings"). An up and a down sweep thus average, and no group is
//!    wider than the resolution. Groups are anchored, not chained (a point joining when it is
//!    within the resolution of its *neighbour*), because a sweep logged continuously along a
//!    slow ramp has every neighbour closer than any sensible resolution: chaining would
//!    merge the whole ramp into one node at its mean field, while anchoring keeps its field
//!    range, averaging only what lies within one resolution. The analyses' parameter is
//!    `field_resolution_T` (default 1e-4 T); state a coarser one (say 5e-3 T) to average a
//!    40,000-reading log into fewer points.
//! 4. **Common grid.** The two branches need not share field points. The grid is the union
//!    of the |B| of both branches' nodes within their overlap [max of the two lowest, min of
//!    the two highest] (grouped around anchors with the same resolution, each group at its
//!    mean), or a grid given by the caller, which must lie within the overlap. Nodes outside
//!    the overlap are not used and are counted.
//! 5. **Interpolation.** Each branch is interpolated linearly in |B| onto the grid (exact at
//!    its own nodes). Linear interpolation never overshoots, which matters for noisy data,
//!    and its error, at most h^2 max|f''| / 8 for a node spacing h, is small against the
//!    noise at the spacing of a real sweep.
//! 6. **Parts.** rho_xx(|B|) = (rho_xx(+B) + rho_xx(-B)) / 2 and
//!    rho_xy(|B|) = (rho_xy(+B) - rho_xy(-B)) / 2, and the removed parts
//!    (rho_xx(+B) - rho_xx(-B)) / 2 and (rho_xy(+B) + rho_xy(-B)) / 2. At B = 0 both branches
//!    are the same node: the symmetrized rho_xy is exactly 0 with zero uncertainty, and its
//!    even part is the zero-field offset.
//!
//! # Zero field
//!
//! A reading is at zero field when |B| <= `zero_field_tolerance_t` (the analyses' parameter
//! `zero_field_tolerance_T`, default 1e-4 T, as in `hall.reduce`). An electromagnet or a
//! superconducting magnet at a nominal zero keeps a remanent field of a few mT; when the
//! logged field is the setpoint such readings sit at exactly 0, but when it is a Hall
//! probe's readback they sit at a few mT of either sign and are then field points of the
//! branch of that sign. Raise `zero_field_tolerance_T` above the remanence when those
//! readings are to be the zero-field node: that matters for rho(0) of a magnetoresistance
//! ratio, and for a sweep at one sign whose nominal zero reads a remanence of the other
//! sign, which otherwise makes a second branch of one point (the warning about points
//! outside the overlap says so and names the parameter).
//!
//! # One field sign
//!
//! Most superconducting-magnet runs sweep one sign only. By Onsager's reciprocity rho_xx is
//! even and rho_xy odd in B, so one branch determines both, up to the contact
//! imperfections that the second branch would have removed. Such a sweep is used as
//! measured and [`Symmetrized::single_field_sign`] is set: at |B| the branch's rho_xx is
//! taken as the even part and its rho_xy as the odd part (for a negative-only sweep
//! rho_xy(+|B|) = -rho_xy(-|B|), the sign convention of an odd function); at B = 0 the
//! odd part is 0 by symmetry, so the zero-field node enters rho_xx only and its rho_xy is
//! the even part there (the zero-field offset, the one measure of the Hall misalignment a
//! single branch gives). The removed parts at nonzero field are not known and are NaN,
//! as are the largest asymmetries. A Hall pickup of the longitudinal contacts stays in
//! rho_xx and a misalignment of the Hall contacts stays in rho_xy:
//! [`Symmetrized::warnings`] says so.
//! The summary of every sweep analysis then says `single_field_sign: true`, and the warning
//! names what stays in the data ([`SweepUse`]): for `mr.ratio`, `mr.kohler`, `mr.oscillations`
//! and `mr.weak_localization` a Hall voltage picked up by the longitudinal contacts; for
//! `spectrum.multi_carrier_fit`, `spectrum.mobility` and `mr.two_band_fit` also the
//! misalignment of the Hall contacts, sized by rho_xy / rho_xx at zero field. `mr.symmetrize`,
//! whose output is the removed parts, needs both signs.
//!
//! The summary numbers [`Symmetrized::max_rho_xx_asymmetry`] and
//! [`Symmetrized::max_rho_xy_asymmetry`] are the largest |odd part of rho_xx| and |even part
//! of rho_xy| over the grid, each relative to the symmetrized rho_xx there: the second is
//! the Hall misalignment fraction of a sample whose Hall contacts are offset. Both are NaN
//! for a sweep at one field sign, which cannot measure them.
//!
//! # Repeated readings
//!
//! A node that merges k >= 2 readings of one field (a group of step 3, or the zero-field
//! readings) holds repeated observations of one quantity, and its standard uncertainty
//! must also reflect how far they disagree, not only what each reading states: otherwise
//! two sweeps that do not agree (a second copy of a sweep scaled by a wrong geometry,
//! another sample, another temperature) average into points as certain as either alone.
//! When the readings disagree beyond their stated uncertainties (a chi-square about their
//! weighted mean whose probability is below [`REPEAT_INCONSISTENCY_P_VALUE`], 1 %), its
//! variance is the larger of
//!
//! - the **internal** one, propagated from the stated uncertainties: sum u_i^2 / k^2, and
//! - the **external** one, from the readings' scatter: the squared standard error of the
//!   mean, s^2 / k with s^2 = sum (x_i - x_mean)^2 / (k - 1), the Type A evaluation of
//!   repeated observations (JCGM 100:2008, GUM 4.2.3).
//!
//! For readings of equal stated uncertainty the external variance is the internal one
//! times the squared Birge ratio chi^2 / (k - 1) (R. T. Birge, Phys. Rev. 40, 207, 1932), so
//! the rule is the Particle Data Group's practice of scaling by the Birge ratio when it is
//! above 1 and never narrowing; the scatter about the node's plain mean is used because the
//! node is that plain mean. Readings that agree keep the internal variance: the scatter of
//! two or three readings is itself too uncertain to replace stated uncertainties, and taking
//! the larger of the two always would widen about a third of the consistent points of two
//! readings by chance. The node's value, and every node of a single reading, are as
//! before, and so is the rho_xx - rho_xy covariance (the propagated one). A group's
//! readings may lie at |B| up to `field_resolution_T` apart along a sloping curve (a densely
//! logged ramp averaged with a coarse resolution): the trend across the node, estimated
//! from its neighbouring nodes' means (a central difference, one-sided at the branch ends),
//! is removed from each reading before the scatter is taken, so that the slope of rho_xy
//! over a group does not pass for disagreement. The zero-field readings need no trend for
//! rho_xx, which is even in B; their rho_xy is odd in B (readings at a magnet's remanence of
//! either sign differ by the Hall slope) and enters no output's uncertainty, so it keeps
//! its internal variance.
//!
//! The rule applies only to readings of the *same* field sign. rho_xx(+B) and rho_xx(-B) are
//! not repeats of one quantity: their difference is the field-odd part of rho_xx, the Hall
//! voltage that longitudinal contacts off the equipotential pick up (a fraction of rho_xy),
//! a real, reproducible signal of the sample's contacts that step 6 removes exactly as the
//! odd part; likewise the even part of rho_xy is the Hall contacts' misalignment. Scaling
//! the even/odd combinations by the disagreement of the two branches would turn every
//! misaligned but well-measured sample into a noisy one, so the symmetrization propagates
//! the nodes' variances only, and reports the parts it removed.
//!
//! Without stated uncertainties the nodes carry none, as before, and the fits estimate the
//! noise from their residuals; the readings' spread is still assessed, as their standard
//! deviation relative to |rho| = sqrt(rho_xx^2 + rho_xy^2) at the node.
//!
//! [`Symmetrized::repeats`] counts the merged points used, those the scatter widened, and
//! lists the ones whose readings disagree far beyond their uncertainties: a Birge ratio
//! sqrt(chi^2 / (k - 1)) about their weighted mean above [`REPEAT_BIRGE_RATIO_LIMIT`] (5), or
//! without uncertainties a relative spread above [`REPEAT_RELATIVE_SPREAD_LIMIT`] (1 %).
//! [`Symmetrized::warnings`] then says how many points, the worst (field, column, the
//! readings' range, the ratio) and what to check: readings of one field that disagree so
//! far are not one measurement repeated but sweeps that do not agree (another sample,
//! contacts that changed, another temperature), which no widening makes one measurement.
//! [`repeated_readings_uncertainty`] is the same rule for a plain list of readings (the
//! zero-field resistivity of `mr.ratio`).
//!
//! # Uncertainties
//!
//! Every output value is a linear combination of the nodes, and the nodes are independent
//! (a node averages k points: variance sum var_i / k^2, or their scatter's when larger; see
//! "Repeated readings"), so the variances and the rho_xx -
//! rho_xy covariance of each output are propagated exactly, including the zero-field node
//! shared by the two branches. Neighbouring grid points that interpolate the same node are
//! correlated; that correlation between fields is not reported, and a union grid has about
//! as many points as the branches have nodes, so a fit that treats the grid points as
//! independent counts the information about right.
//!
//! # Tensor conversion
//!
//! [`conductivity_point`] and [`resistivity_point`] convert between (rho_xx, rho_xy) and
//! (sigma_xx, sigma_xy) with the inversion of [`crate::field_tensor::invert_tensor`];
//! the 2 x 2 covariance propagates to first order through the Jacobian of the inversion,
//! 1/D^2 [[b^2 - a^2, -2ab], [-2ab, a^2 - b^2]] at (a, b), D = a^2 + b^2. The conversion
//! correlates the two components even when the inputs are independent, so the result
//! carries its correlation.
//!
//! # Sheet and volume
//!
//! For a layer of thickness t: rho = rho_sheet t, sigma = sigma_sheet / t, n = n_sheet / t
//! ([`Thickness`]); the thickness uncertainty adds in quadrature. The sweep and the
//! multi-carrier fit work in sheet quantities, which do not need the thickness.

use std::collections::BTreeMap;

use crate::field_tensor::{invert_tensor, ResistivityTensor};

// ---------------------------------------------------------------------------------------
// Sweeps by temperature: how the rows of a table that holds one sample's sweeps at several
// temperatures are told apart (a gap between consecutive sorted temperatures larger than the
// tolerance starts a new sweep; see the `sweep_table` module of mobilis-sdk).

/// Default of `temperature_tolerance_K`: consecutive sorted temperatures further apart than
/// this (and than the relative tolerance) belong to different sweeps, K. Below the 0.1 K
/// steps of a sub-kelvin series, above the scatter of a stage held at one setpoint (common
/// practice).
pub const DEFAULT_TEMPERATURE_TOLERANCE_K: f64 = 0.05;

/// Default of `temperature_relative_tolerance`: the same gap relative to T, which matters
/// above about 10 K, where a stage scatters by a fraction of T rather than by mK (common
/// practice).
pub const DEFAULT_TEMPERATURE_RELATIVE_TOLERANCE: f64 = 0.005;

/// How the rows of a table are told apart into sweeps by temperature (the `sweep_table`
/// module of mobilis-sdk describes the rule).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TemperatureGrouping {
    /// K, 0 or more.
    pub tolerance_k: f64,
    /// Dimensionless, 0 or more.
    pub relative_tolerance: f64,
}

impl Default for TemperatureGrouping {
    fn default() -> Self {
        TemperatureGrouping {
            tolerance_k: DEFAULT_TEMPERATURE_TOLERANCE_K,
            relative_tolerance: DEFAULT_TEMPERATURE_RELATIVE_TOLERANCE,
        }
    }
}

impl TemperatureGrouping {
    /// The largest gap between consecutive temperatures of one sweep at `temperature_k`, K.
    pub fn allowed_gap_k(&self, temperature_k: f64) -> f64 {
        self.tolerance_k.max(self.relative_tolerance * temperature_k.abs())
    }

    /// The two tolerances as a message names them.
    pub fn describe(&self) -> String {
        format!(
            "temperature_tolerance_K = {} K, temperature_relative_tolerance = {}",
            self.tolerance_k, self.relative_tolerance
        )
    }
}

#[cfg(test)]
mod tests;

/// Standard uncertainties of rho_xx and rho_xy at one field and their correlation.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ResistivityUncertainty {
    /// ohm per square.
    pub rho_xx_ohm_sq: f64,
    /// ohm.
    pub rho_xy_ohm: f64,
    /// Correlation coefficient of the two, in (-1, 1); 0 for separate voltmeter readings.
    pub correlation: f64,
}

impl ResistivityUncertainty {
    /// Uncorrelated uncertainties.
    pub fn independent(rho_xx_ohm_sq: f64, rho_xy_ohm: f64) -> Self {
        ResistivityUncertainty {
            rho_xx_ohm_sq,
            rho_xy_ohm,
            correlation: 0.0,
        }
    }
}

/// One measured point of a field sweep (a row of the `sweep` table).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SweepPoint {
    pub field_t: f64,
    /// Sheet resistivity, ohm per square.
    pub rho_xx_ohm_sq: f64,
    /// Transverse sheet resistivity, ohm, positive for holes at positive field.
    pub rho_xy_ohm: f64,
    pub uncertainty: Option<ResistivityUncertainty>,
}

impl SweepPoint {
    pub fn new(field_t: f64, rho_xx_ohm_sq: f64, rho_xy_ohm: f64) -> Self {
        SweepPoint {
            field_t,
            rho_xx_ohm_sq,
            rho_xy_ohm,
            uncertainty: None,
        }
    }

    pub fn with_uncertainty(self, uncertainty: ResistivityUncertainty) -> Self {
        SweepPoint {
            uncertainty: Some(uncertainty),
            ..self
        }
    }
}

/// Standard uncertainties of sigma_xx and sigma_xy at one field and their correlation.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TensorUncertainty {
    /// S.
    pub sigma_xx_s: f64,
    /// S.
    pub sigma_xy_s: f64,
    /// Correlation coefficient, in (-1, 1).
    pub correlation: f64,
}

/// The sheet conductivity tensor at one field: what the multi-carrier analyses fit.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TensorPoint {
    pub field_t: f64,
    /// S.
    pub sigma_xx_s: f64,
    /// S, positive for holes at positive field.
    pub sigma_xy_s: f64,
    pub uncertainty: Option<TensorUncertainty>,
}

impl TensorPoint {
    pub fn new(field_t: f64, sigma_xx_s: f64, sigma_xy_s: f64) -> Self {
        TensorPoint {
            field_t,
            sigma_xx_s,
            sigma_xy_s,
            uncertainty: None,
        }
    }

    pub fn with_uncertainty(self, uncertainty: TensorUncertainty) -> Self {
        TensorPoint {
            uncertainty: Some(uncertainty),
            ..self
        }
    }
}

/// Which |B| values the symmetrized sweep is given at.
#[derive(Debug, Clone, PartialEq, Default)]
pub enum FieldGrid {
    /// The union of both branches' |B| within their overlap (default).
    #[default]
    Union,
    /// These |B| values, T (sorted and deduplicated; each within the overlap).
    Given(Vec<f64>),
}

/// How a sweep is symmetrized.
#[derive(Debug, Clone, PartialEq)]
pub struct SymmetrizeSettings {
    /// |B| at or below this is zero field, T. Default 1e-4 T (1 G), the zero-field
    /// tolerance of `hall.reduce`.
    pub zero_field_tolerance_t: f64,
    /// |B| values of one branch (and of the union grid) within this of the lowest of their
    /// group are one field (groups anchored, never chained), T. Default 1e-4 T: below the
    /// setpoint scatter of a superconducting magnet, above the resolution of its readback
    /// (common practice).
    pub field_resolution_t: f64,
    pub grid: FieldGrid,
}

impl Default for SymmetrizeSettings {
    fn default() -> Self {
        SymmetrizeSettings {
            zero_field_tolerance_t: 1e-4,
            field_resolution_t: 1e-4,
            grid: FieldGrid::Union,
        }
    }
}

/// One point of a symmetrized sweep.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SymmetrizedPoint {
    /// |B|, T.
    pub field_t: f64,
    /// Even part of rho_xx, ohm per square.
    pub rho_xx_ohm_sq: f64,
    /// Odd part of rho_xy, ohm (its value at +|B|).
    pub rho_xy_ohm: f64,
    pub uncertainty: Option<ResistivityUncertainty>,
    /// The odd part removed from rho_xx, (rho_xx(+B) - rho_xx(-B)) / 2, ohm per square.
    pub rho_xx_odd_ohm_sq: f64,
    /// The even part removed from rho_xy, (rho_xy(+B) + rho_xy(-B)) / 2, ohm.
    pub rho_xy_even_ohm: f64,
}

impl SymmetrizedPoint {
    /// As a sweep point at +|B|.
    pub fn to_sweep_point(&self) -> SweepPoint {
        SweepPoint {
            field_t: self.field_t,
            rho_xx_ohm_sq: self.rho_xx_ohm_sq,
            rho_xy_ohm: self.rho_xy_ohm,
            uncertainty: self.uncertainty,
        }
    }
}

/// A symmetrized sweep and what was done to get it.
#[derive(Debug, Clone, PartialEq)]
pub struct Symmetrized {
    /// Ascending in |B|.
    pub points: Vec<SymmetrizedPoint>,
    /// The |B| range both branches cover, T.
    pub overlap_t: (f64, f64),
    /// Measured points with B > tolerance, B < -tolerance, and at zero field.
    pub positive_points: usize,
    pub negative_points: usize,
    pub zero_field_points: usize,
    /// Measured points outside the overlap, not used.
    pub points_outside_overlap: usize,
    /// The largest |B| of any measured point, T.
    pub measured_max_field_t: f64,
    /// Largest |rho_xx odd part| / rho_xx over the grid; NaN for a single field sign.
    pub max_rho_xx_asymmetry: f64,
    /// Largest |rho_xy even part| / rho_xx over the grid; NaN for a single field sign.
    pub max_rho_xy_asymmetry: f64,
    /// True when the sweep had nonzero fields of one sign only and that branch was used as
    /// measured: rho_xx taken as even, rho_xy as odd, the contact misalignment not removed
    /// (see "One field sign" in the module documentation).
    pub single_field_sign: bool,
    /// The points that merge several readings and how far those disagree (see "Repeated
    /// readings" in the module documentation).
    pub repeats: RepeatSummary,
}

/// The fraction of the measured field range that points outside the overlap must take with
/// them before [`Symmetrized::warnings`] mentions them (a choice, not a standard).
pub const SIGNIFICANT_RANGE_LOSS: f64 = 0.1;

/// What an analysis takes from a symmetrized sweep, for the wording of its warnings.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SweepUse {
    /// The even part of rho_xx only (magnetoresistance, oscillations, weak localization).
    EvenRhoXx,
    /// Both components (the multi-carrier, spectrum and two-band fits).
    Tensor,
}

impl Symmetrized {
    /// The sign of the measured branch of a single-sign sweep: "positive" or "negative".
    pub fn measured_sign(&self) -> Option<&'static str> {
        self.single_field_sign.then_some(if self.positive_points > 0 {
            "positive"
        } else {
            "negative"
        })
    }

    /// The warnings every analysis of this sweep passes on: a single field sign (what could
    /// not be removed), and measured points outside the overlap (with the remanence hint
    /// naming `zero_field_tolerance_T`).
    pub fn warnings(&self, uses: SweepUse) -> Vec<String> {
        let mut warnings = Vec::new();
        if let Some(sign) = self.measured_sign() {
            let what = match uses {
                SweepUse::EvenRhoXx => "rho_xx was taken as even in B as measured, not symmetrized: a Hall voltage picked up by misaligned longitudinal contacts (odd in B) stays in it",
                SweepUse::Tensor => "rho_xx was taken as even and rho_xy as odd in B as measured, not symmetrized: the misalignment of the Hall contacts (a part of rho_xx picked up in rho_xy, even in B) could not be removed, nor a Hall pickup in rho_xx",
            };
            let offset = self
                .points
                .first()
                .filter(|p| p.field_t == 0.0 && uses == SweepUse::Tensor)
                .map(|p| {
                    format!(
                        "; rho_xy at zero field is {:.3e} of rho_xx, a measure of that misalignment",
                        p.rho_xy_even_ohm / p.rho_xx_ohm_sq
                    )
                })
                .unwrap_or_default();
            warnings.push(format!(
                "single_field_sign: the sweep has {sign} fields only ({} points up to |B| = {:.4} T), so {what}{offset}; measure both field signs to remove it",
                self.positive_points + self.negative_points,
                self.overlap_t.1,
            ));
        }
        // Points beyond the overlap matter to an analysis when they take a real part of the
        // field range with them (a tenth or more; an end point of one branch a few mT beyond
        // the other's is setpoint scatter).
        let kept = self.overlap_t.1 - self.overlap_t.0;
        if kept < (1.0 - SIGNIFICANT_RANGE_LOSS) * self.measured_max_field_t {
            warnings.extend(self.outside_overlap_warning());
        }
        warnings.extend(self.repeat_warning(uses));
        warnings
    }

    /// Readings merged into one point that disagree far beyond their uncertainties (or,
    /// without uncertainties, by more than [`REPEAT_RELATIVE_SPREAD_LIMIT`] of |rho|), in
    /// the columns the analysis uses, in words: how many points, the worst, what to check.
    pub fn repeat_warning(&self, uses: SweepUse) -> Option<String> {
        let repeats = &self.repeats;
        let relevant: Vec<&RepeatSpread> = repeats
            .disagreements
            .iter()
            .filter(|s| uses == SweepUse::Tensor || s.column == "rho_xx_ohm_sq")
            .collect();
        let worst = relevant.iter().max_by(|a, b| a.measure.total_cmp(&b.measure))?;
        let mut fields: Vec<u64> = relevant.iter().map(|s| s.field_t.to_bits()).collect();
        fields.sort_unstable();
        fields.dedup();
        let (how, measure, consequence) = if repeats.stated_uncertainties {
            (
                format!(
                    "differ by more than {REPEAT_BIRGE_RATIO_LIMIT} times their stated uncertainties (Birge ratio)"
                ),
                format!("Birge ratio {:.1}", worst.measure),
                "each merged point's uncertainty was widened to its readings' scatter, which the results carry (a fit takes the points as independent, so a difference common to every field, as between two whole sweeps, is not covered)",
            )
        } else {
            (
                format!(
                    "spread by more than {REPEAT_RELATIVE_SPREAD_LIMIT} of |rho| (no rho_xx_ohm_sq_unc and rho_xy_ohm_unc given to compare with)"
                ),
                format!("a spread of {:.3e} of |rho|", worst.measure),
                "the merged point is their mean",
            )
        };
        Some(format!(
            "repeated readings disagree: at {} of the {} points that merge several readings (within field_resolution_T of each other, or at zero field) the readings {how}; the worst at B = {:.4} T in {}: {} readings from {:.6e} to {:.6e}, {measure}; {consequence}, but readings of one field that disagree so far are not one measurement repeated: check whether the table joins sweeps that do not agree (another sample, contacts that changed, another temperature) and analyse them apart",
            fields.len(),
            repeats.merged_points,
            worst.field_t,
            worst.column,
            worst.readings,
            worst.lowest,
            worst.highest,
        ))
    }

    /// The measured points outside the overlap, if any, in words (naming
    /// `zero_field_tolerance_T` for a magnet's remanence at its nominal zero).
    pub fn outside_overlap_warning(&self) -> Option<String> {
        (self.points_outside_overlap > 0).then(|| {
            format!(
                "{} measured point(s) lie outside the |B| range both field signs cover, [{:.4}, {:.4}] T of [0, {:.4}] T measured, and were not used; measure both signs over the same range to use them, or, if one sign holds only readings near zero field (a magnet's remanence), raise zero_field_tolerance_T above them so that they count as zero field",
                self.points_outside_overlap, self.overlap_t.0, self.overlap_t.1, self.measured_max_field_t
            )
        })
    }
}

/// Why a sweep is refused.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum SweepError {
    #[error("the sweep has no points; give rho_xx and rho_xy against field")]
    Empty,
    #[error("point {index}: {column} is {value}; give a finite number or drop the point")]
    NonFinite {
        index: usize,
        column: &'static str,
        value: f64,
    },
    #[error(
        "point {index}: rho_xx_ohm_sq is {value}; a sample's longitudinal resistivity is positive, so check the voltage polarity and the units, or drop the point"
    )]
    NonPositiveRhoXx { index: usize, value: f64 },
    #[error(
        "point {index}: the uncertainty {column} is {value}; give a finite positive standard uncertainty (a correlation within (-1, 1))"
    )]
    InvalidUncertainty {
        index: usize,
        column: &'static str,
        value: f64,
    },
    #[error("{with} points have uncertainties and {without} do not; give uncertainties for every point or for none")]
    MixedUncertainties { with: usize, without: usize },
    #[error(
        "the sweep has {present} fields only (|B| from {min_t} T to {max_t} T); separating the even and odd parts needs fields of both signs, so measure the {missing} branch too (zero field is |B| <= zero_field_tolerance_T; the analyses of the parts accept one sign and flag it single_field_sign)"
    )]
    OneFieldSign {
        present: &'static str,
        missing: &'static str,
        min_t: f64,
        max_t: f64,
    },
    #[error(
        "all {points} points are at zero field (|B| <= zero_field_tolerance_T = {tolerance_t} T); give readings in field, or lower zero_field_tolerance_T if the field points were taken for zero field"
    )]
    ZeroFieldOnly { points: usize, tolerance_t: f64 },
    #[error(
        "the positive branch covers |B| {positive_t:?} T and the negative branch {negative_t:?} T, which do not overlap; measure both signs over a common field range, or, if one sign holds only readings near zero field (a magnet's remanence), raise zero_field_tolerance_T above them so that they count as zero field"
    )]
    NoOverlap {
        positive_t: (f64, f64),
        negative_t: (f64, f64),
    },
    #[error(
        "grid field {field_t} T is outside the range both branches cover, [{low_t}, {high_t}] T; give grid fields within it"
    )]
    GridOutsideOverlap { field_t: f64, low_t: f64, high_t: f64 },
    #[error("grid field {value} is not a finite |B| of 0 or more; give magnitudes in tesla")]
    InvalidGridField { value: f64 },
    #[error("{name} is {value}; give a finite value of 0 or more")]
    InvalidSetting { name: &'static str, value: f64 },
    #[error("thickness_m is {value}; give a positive finite thickness in metres")]
    InvalidThickness { value: f64 },
    #[error("thickness_m_unc is {value}; give a finite standard uncertainty of 0 or more in metres, or none")]
    InvalidThicknessUncertainty { value: f64 },
}

/// Checks every point and returns whether they carry uncertainties.
pub fn validate_points(points: &[SweepPoint]) -> Result<bool, SweepError> {
    if points.is_empty() {
        return Err(SweepError::Empty);
    }
    let mut with = 0;
    for (index, point) in points.iter().enumerate() {
        for (column, value) in [
            ("field_T", point.field_t),
            ("rho_xx_ohm_sq", point.rho_xx_ohm_sq),
            ("rho_xy_ohm", point.rho_xy_ohm),
        ] {
            if !value.is_finite() {
                return Err(SweepError::NonFinite { index, column, value });
            }
        }
        if point.rho_xx_ohm_sq <= 0.0 {
            return Err(SweepError::NonPositiveRhoXx {
                index,
                value: point.rho_xx_ohm_sq,
            });
        }
        if let Some(unc) = point.uncertainty {
            with += 1;
            for (column, value) in [
                ("rho_xx_ohm_sq_unc", unc.rho_xx_ohm_sq),
                ("rho_xy_ohm_unc", unc.rho_xy_ohm),
            ] {
                if !(value.is_finite() && value > 0.0) {
                    return Err(SweepError::InvalidUncertainty { index, column, value });
                }
            }
            if !(unc.correlation.is_finite() && unc.correlation.abs() < 1.0) {
                return Err(SweepError::InvalidUncertainty {
                    index,
                    column: "correlation",
                    value: unc.correlation,
                });
            }
        }
    }
    if with != 0 && with != points.len() {
        return Err(SweepError::MixedUncertainties {
            with,
            without: points.len() - with,
        });
    }
    Ok(with > 0)
}

/// An averaged field of one branch: |B|, values, and their (co)variances.
#[derive(Debug, Clone, Copy)]
struct Node {
    field_t: f64,
    rho_xx: f64,
    rho_xy: f64,
    var_xx: f64,
    var_xy: f64,
    cov: f64,
    /// How many measured points it averages.
    count: usize,
    /// +1 or -1 for a node of the positive or the negative branch, 0 for the zero-field node.
    sign: f64,
    /// How far its readings disagree, per column (rho_xx, rho_xy); `None` for a single
    /// reading and for the zero-field node's rho_xy (see "Repeated readings").
    spread: [Option<RepeatSpread>; 2],
    /// True when the scatter of its readings, not their stated uncertainties, set a variance.
    widened: bool,
}

/// A Birge ratio above this, in some merged point, is reported as readings that disagree
/// far beyond their stated uncertainties (see "Repeated readings"). For two consistent
/// readings (one degree of freedom) a ratio above 5 has a probability of 6e-7, so a sweep of
/// a thousand merged points raises it by chance less than once in a thousand sweeps, while
/// readings of different samples, contacts or temperatures disagree by hundreds.
pub const REPEAT_BIRGE_RATIO_LIMIT: f64 = 5.0;

/// Without stated uncertainties: a standard deviation of the readings merged into one point
/// above this fraction of |rho| = sqrt(rho_xx^2 + rho_xy^2) there is reported. Repeated
/// readings of one sweep agree to 1e-5 to 1e-3 of their value (common practice; the spread
/// of a lock-in or bridge reading), so ten times the noisiest of those is not noise.
pub const REPEAT_RELATIVE_SPREAD_LIMIT: f64 = 0.01;

/// How far the readings merged into one point of a sweep disagree, in one column.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct RepeatSpread {
    /// The point's field, signed by its branch (0 at zero field), T.
    pub field_t: f64,
    /// "rho_xx_ohm_sq" or "rho_xy_ohm", as the `sweep` table names it.
    pub column: &'static str,
    /// How many readings were merged.
    pub readings: usize,
    /// The lowest and the highest of those readings, in the column's unit.
    pub lowest: f64,
    pub highest: f64,
    /// With stated uncertainties the Birge ratio sqrt(chi^2 / (k - 1)) of the readings about
    /// their weighted mean; without, their standard deviation over |rho| at that field.
    pub measure: f64,
}

/// The merged points of a symmetrized sweep and how far their readings disagree.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct RepeatSummary {
    /// Whether [`RepeatSpread::measure`] is a Birge ratio (stated uncertainties) or a
    /// relative spread (none stated).
    pub stated_uncertainties: bool,
    /// Points used (within the overlap, or at zero field) that merge two or more readings.
    pub merged_points: usize,
    /// Of those, the ones whose uncertainty the readings' scatter widened.
    pub widened_points: usize,
    /// The merged points whose readings disagree beyond [`REPEAT_BIRGE_RATIO_LIMIT`] (or
    /// [`REPEAT_RELATIVE_SPREAD_LIMIT`] without stated uncertainties), per column.
    pub disagreements: Vec<RepeatSpread>,
}

/// The squared standard error of the mean of `values` from their scatter,
/// s^2 / k = sum (x_i - mean)^2 / ((k - 1) k) (JCGM 100:2008, GUM 4.2.3); 0 for one value.
fn squared_standard_error_of_mean(values: &[f64]) -> f64 {
    if values.len() < 2 {
        return 0.0;
    }
    let k = values.len() as f64;
    let mean = values.iter().sum::<f64>() / k;
    let variance = values.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / (k - 1.0);
    variance / k
}

/// The standard uncertainty of the plain mean of repeated readings of one quantity (see
/// "Repeated readings" in the module documentation): with stated standard uncertainties
/// `stated`, the larger of the propagated one, sqrt(sum u_i^2) / k, and the standard error of
/// the mean from the readings' scatter; without, that standard error for two or more
/// readings and none for one.
pub fn repeated_readings_uncertainty(values: &[f64], stated: Option<&[f64]>) -> Option<f64> {
    let external = squared_standard_error_of_mean(values).sqrt();
    match stated {
        Some(stated) => {
            let internal = stated.iter().map(|u| u * u).sum::<f64>().sqrt() / values.len() as f64;
            let (_, birge_ratio) = column_scatter(values, Some(stated), 1.0);
            Some(if inconsistent(birge_ratio, values.len()) && external > internal {
                external
            } else {
                internal
            })
        }
        None => (values.len() > 1).then_some(external),
    }
}

/// Below this probability of a chi-square at least as large, readings are taken as
/// disagreeing beyond their stated uncertainties, and their scatter may widen the merged
/// point (see "Repeated readings"): 1 %, a common significance level (common practice).
/// Without the test, the scatter of readings that agree would still widen about a third of
/// the points of two readings (a chi-square of one degree of freedom exceeds its mean with
/// probability 0.32), inflating the uncertainties of consistent data and pulling every
/// fit's reduced chi-square below 1.
pub const REPEAT_INCONSISTENCY_P_VALUE: f64 = 0.01;

/// Whether `readings` values with this Birge ratio about their weighted mean disagree
/// beyond their stated uncertainties: P(chi^2_{k-1} >= (k - 1) R^2) below
/// [`REPEAT_INCONSISTENCY_P_VALUE`].
fn inconsistent(birge_ratio: f64, readings: usize) -> bool {
    if readings < 2 || !birge_ratio.is_finite() {
        return false;
    }
    let degrees_of_freedom = readings - 1;
    let chi_square = birge_ratio * birge_ratio * degrees_of_freedom as f64;
    mobilis_numerics::fit::chi_square_p_value(chi_square, degrees_of_freedom) < REPEAT_INCONSISTENCY_P_VALUE
}

/// How one column of a group of readings merged into one node disagrees: its squared
/// standard error of the mean from the scatter, and the spread's measure (the Birge ratio
/// with stated uncertainties, the relative standard deviation without). `residuals` are the
/// readings less the field trend within the group; `scale` is |rho| at the node.
fn column_scatter(residuals: &[f64], stated: Option<&[f64]>, scale: f64) -> (f64, f64) {
    let external = squared_standard_error_of_mean(residuals);
    let k = residuals.len() as f64;
    let measure = match stated {
        Some(stated) => {
            let weights: Vec<f64> = stated.iter().map(|u| 1.0 / (u * u)).collect();
            let weighted_mean =
                residuals.iter().zip(&weights).map(|(r, w)| r * w).sum::<f64>() / weights.iter().sum::<f64>();
            let chi_square: f64 = residuals
                .iter()
                .zip(&weights)
                .map(|(r, w)| (r - weighted_mean).powi(2) * w)
                .sum();
            (chi_square / (k - 1.0)).sqrt()
        }
        None => (external * k).sqrt() / scale,
    };
    (external, measure)
}

/// Reads one column of a sweep point.
type ColumnValue = fn(&SweepPoint) -> f64;
/// Reads the stated uncertainty of that column.
type ColumnUncertainty = fn(&ResistivityUncertainty) -> f64;

impl Node {
    /// Widens the node's variances to the scatter of its readings where that is the larger,
    /// and records how far they disagree (see "Repeated readings"). `group` holds the
    /// node's readings with |B|; `slopes` the field trend of rho_xx and rho_xy across the
    /// node (d rho / d|B| from its neighbours), `None` for a column not to be assessed.
    fn assess_repeats(&mut self, group: &[(f64, &SweepPoint)], slopes: [Option<f64>; 2]) {
        if group.len() < 2 {
            return;
        }
        let stated = group[0].1.uncertainty.is_some();
        let scale = self.rho_xx.hypot(self.rho_xy);
        let columns: [(&'static str, ColumnValue, ColumnUncertainty); 2] = [
            ("rho_xx_ohm_sq", |p| p.rho_xx_ohm_sq, |u| u.rho_xx_ohm_sq),
            ("rho_xy_ohm", |p| p.rho_xy_ohm, |u| u.rho_xy_ohm),
        ];
        for (index, (column, value, uncertainty)) in columns.into_iter().enumerate() {
            let Some(slope) = slopes[index] else { continue };
            let residuals: Vec<f64> = group
                .iter()
                .map(|(b, p)| value(p) - slope * (b - self.field_t))
                .collect();
            let stated_values: Option<Vec<f64>> = stated.then(|| {
                group
                    .iter()
                    .map(|(_, p)| p.uncertainty.as_ref().map_or(f64::NAN, uncertainty))
                    .collect()
            });
            let (external, measure) = column_scatter(&residuals, stated_values.as_deref(), scale);
            let variance = if index == 0 { &mut self.var_xx } else { &mut self.var_xy };
            if stated && inconsistent(measure, group.len()) && external > *variance {
                *variance = external;
                self.widened = true;
            }
            let (lowest, highest) = group
                .iter()
                .map(|(_, p)| value(p))
                .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), v| (lo.min(v), hi.max(v)));
            self.spread[index] = Some(RepeatSpread {
                field_t: self.sign * self.field_t,
                column,
                readings: group.len(),
                lowest,
                highest,
                measure,
            });
        }
    }
}

/// Averages a group of measured points (given with |B|) into one node of the branch of
/// `sign` (0 for the zero-field node); the repeats are assessed afterwards.
fn average(group: &[(f64, &SweepPoint)], sign: f64) -> Node {
    let k = group.len() as f64;
    let mean = |f: &dyn Fn(&(f64, &SweepPoint)) -> f64| group.iter().map(f).sum::<f64>() / k;
    let unc = |f: &dyn Fn(&ResistivityUncertainty) -> f64| {
        group
            .iter()
            .map(|(_, p)| p.uncertainty.as_ref().map_or(0.0, f))
            .sum::<f64>()
            / (k * k)
    };
    Node {
        field_t: mean(&|(b, _)| *b),
        rho_xx: mean(&|(_, p)| p.rho_xx_ohm_sq),
        rho_xy: mean(&|(_, p)| p.rho_xy_ohm),
        var_xx: unc(&|u| u.rho_xx_ohm_sq * u.rho_xx_ohm_sq),
        var_xy: unc(&|u| u.rho_xy_ohm * u.rho_xy_ohm),
        cov: unc(&|u| u.correlation * u.rho_xx_ohm_sq * u.rho_xy_ohm),
        count: group.len(),
        sign,
        spread: [None, None],
        widened: false,
    }
}

/// Splits ascending values into groups around anchors: a group starts at its first value
/// and takes every following value within `resolution` of it (not of its neighbour, so that
/// a densely sampled ramp is never chained into one group); returns the index ranges.
pub fn anchored_groups(sorted: &[f64], resolution: f64) -> Vec<std::ops::Range<usize>> {
    let mut groups = Vec::new();
    let mut start = 0;
    for i in 1..=sorted.len() {
        if i == sorted.len() || sorted[i] - sorted[start] > resolution {
            if start < i {
                groups.push(start..i);
            }
            start = i;
        }
    }
    groups
}

/// The nodes of one branch (|B| ascending, the branch of `sign`), from its points as
/// (|B|, point), each with its repeats assessed.
fn branch_nodes(mut members: Vec<(f64, &SweepPoint)>, resolution: f64, sign: f64) -> Vec<Node> {
    members.sort_by(|a, b| a.0.total_cmp(&b.0));
    let fields: Vec<f64> = members.iter().map(|(b, _)| *b).collect();
    let groups = anchored_groups(&fields, resolution);
    let mut nodes: Vec<Node> = groups
        .iter()
        .map(|range| average(&members[range.clone()], sign))
        .collect();
    // The trend of each column across a node, from its neighbours' means (a central
    // difference, one-sided at the ends), so that readings of one group that lie at
    // slightly different fields along a sloping curve do not count as scatter.
    let slopes: Vec<[Option<f64>; 2]> = (0..nodes.len())
        .map(|j| {
            if nodes.len() < 2 {
                return [Some(0.0), Some(0.0)];
            }
            let (a, b) = (&nodes[j.saturating_sub(1)], &nodes[(j + 1).min(nodes.len() - 1)]);
            let run = b.field_t - a.field_t;
            [Some((b.rho_xx - a.rho_xx) / run), Some((b.rho_xy - a.rho_xy) / run)]
        })
        .collect();
    for ((node, range), slopes) in nodes.iter_mut().zip(&groups).zip(slopes) {
        node.assess_repeats(&members[range.clone()], slopes);
    }
    nodes
}

/// Linear interpolation weights of `field` on ascending `nodes` (indices into `nodes`).
fn interpolation_weights(nodes: &[Node], field: f64) -> Vec<(usize, f64)> {
    let last = nodes.len() - 1;
    let x = field.clamp(nodes[0].field_t, nodes[last].field_t);
    if last == 0 {
        return vec![(0, 1.0)];
    }
    // The first node above x, kept within 1..=last so that [j-1, j] is an interval.
    let upper = nodes.partition_point(|node| node.field_t <= x).clamp(1, last);
    let (a, b) = (&nodes[upper - 1], &nodes[upper]);
    let w = (x - a.field_t) / (b.field_t - a.field_t);
    if w <= 0.0 {
        vec![(upper - 1, 1.0)]
    } else if w >= 1.0 {
        vec![(upper, 1.0)]
    } else {
        vec![(upper - 1, 1.0 - w), (upper, w)]
    }
}

/// Symmetrizes rho_xx and antisymmetrizes rho_xy of a sweep (see the module documentation).
pub fn symmetrize(points: &[SweepPoint], settings: &SymmetrizeSettings) -> Result<Symmetrized, SweepError> {
    for (name, value) in [
        ("zero_field_tolerance_T", settings.zero_field_tolerance_t),
        ("field_resolution_T", settings.field_resolution_t),
    ] {
        if !(value.is_finite() && value >= 0.0) {
            return Err(SweepError::InvalidSetting { name, value });
        }
    }
    let with_uncertainty = validate_points(points)?;
    let tolerance = settings.zero_field_tolerance_t;
    let zero: Vec<(f64, &SweepPoint)> = points
        .iter()
        .filter(|p| p.field_t.abs() <= tolerance)
        .map(|p| (0.0, p))
        .collect();
    let positive: Vec<(f64, &SweepPoint)> = points
        .iter()
        .filter(|p| p.field_t > tolerance)
        .map(|p| (p.field_t, p))
        .collect();
    let negative: Vec<(f64, &SweepPoint)> = points
        .iter()
        .filter(|p| p.field_t < -tolerance)
        .map(|p| (-p.field_t, p))
        .collect();
    // The sign of the one measured branch of a single-sign sweep (see "One field sign").
    let single_sign: Option<f64> = match (positive.is_empty(), negative.is_empty()) {
        (false, false) => None,
        (true, true) => {
            return Err(SweepError::ZeroFieldOnly {
                points: zero.len(),
                tolerance_t: tolerance,
            })
        }
        (false, true) => Some(1.0),
        (true, false) => Some(-1.0),
    };
    let (positive_points, negative_points, zero_field_points) = (positive.len(), negative.len(), zero.len());

    // Node list of each branch, the zero-field node first in both; the shared node gets
    // the same global index so that its correlation between the branches is exact. A
    // single-sign sweep has one branch, listed twice.
    // The zero-field readings repeat rho_xx(0), which is even in B, so they need no trend;
    // their rho_xy is odd in B (readings at a magnet's remanence of either sign differ by
    // the Hall slope) and enters no output's uncertainty, so it is not assessed.
    let zero_node = (!zero.is_empty()).then(|| {
        let mut node = average(&zero, 0.0);
        node.assess_repeats(&zero, [Some(0.0), None]);
        node
    });
    let resolution = settings.field_resolution_t;
    let mut nodes: Vec<Node> = Vec::new();
    let mut branch_indices: [Vec<usize>; 2] = [Vec::new(), Vec::new()];
    if let Some(node) = zero_node {
        nodes.push(node);
        branch_indices[0].push(0);
        branch_indices[1].push(0);
    }
    for (branch, members) in [positive, negative].into_iter().enumerate() {
        let sign = if branch == 0 { 1.0 } else { -1.0 };
        for node in branch_nodes(members, resolution, sign) {
            branch_indices[branch].push(nodes.len());
            nodes.push(node);
        }
    }
    if single_sign.is_some() {
        let measured = if branch_indices[0].len() >= branch_indices[1].len() {
            0
        } else {
            1
        };
        branch_indices[1 - measured] = branch_indices[measured].clone();
    }
    let branch_nodes_of = |branch: usize| -> Vec<Node> { branch_indices[branch].iter().map(|&i| nodes[i]).collect() };
    let branches = [branch_nodes_of(0), branch_nodes_of(1)];
    let span = |b: &[Node]| (b[0].field_t, b[b.len() - 1].field_t);
    let (positive_span, negative_span) = (span(&branches[0]), span(&branches[1]));
    let low = positive_span.0.max(negative_span.0);
    let high = positive_span.1.min(negative_span.1);
    if low > high {
        return Err(SweepError::NoOverlap {
            positive_t: positive_span,
            negative_t: negative_span,
        });
    }
    // A node within the resolution of the overlap counts as inside it (its grid field is
    // clamped to the overlap), so that branches whose ends differ by setpoint scatter lose
    // nothing.
    let inside = |b: f64| b >= low - resolution && b <= high + resolution;
    let points_outside_overlap: usize = nodes.iter().filter(|n| !inside(n.field_t)).map(|n| n.count).sum();
    let repeats = repeat_summary(
        nodes.iter().filter(|n| n.sign == 0.0 || inside(n.field_t)),
        with_uncertainty,
    );

    let grid: Vec<f64> = match &settings.grid {
        FieldGrid::Union => {
            let mut fields: Vec<f64> = nodes.iter().map(|n| n.field_t).filter(|b| inside(*b)).collect();
            fields.sort_by(f64::total_cmp);
            fields.dedup();
            anchored_groups(&fields, resolution)
                .into_iter()
                .map(|r| {
                    // A cluster holding the zero-field node stays at exactly 0, where the
                    // antisymmetrized rho_xy vanishes by construction; the others are
                    // clamped into the overlap, so no branch is extrapolated.
                    if r.start == 0 && fields[0] == 0.0 {
                        0.0
                    } else {
                        (fields[r.clone()].iter().sum::<f64>() / r.len() as f64).clamp(low, high)
                    }
                })
                .collect()
        }
        FieldGrid::Given(given) => {
            let mut fields = Vec::with_capacity(given.len());
            for &value in given {
                if !(value.is_finite() && value >= 0.0) {
                    return Err(SweepError::InvalidGridField { value });
                }
                // A relative slack of 1e-12 forgives a grid written out in decimal.
                let slack = 1e-12 * high.max(1e-300);
                if value < low - slack || value > high + slack {
                    return Err(SweepError::GridOutsideOverlap {
                        field_t: value,
                        low_t: low,
                        high_t: high,
                    });
                }
                fields.push(value.clamp(low, high));
            }
            fields.sort_by(f64::total_cmp);
            fields.dedup();
            fields
        }
    };

    let mut output = Vec::with_capacity(grid.len());
    let (mut max_xx_asym, mut max_xy_asym) = (0.0f64, 0.0f64);
    for &field in &grid {
        // Coefficients of each global node in the even (c) and odd (d) combinations.
        let mut even: BTreeMap<usize, f64> = BTreeMap::new();
        let mut odd: BTreeMap<usize, f64> = BTreeMap::new();
        match single_sign {
            None => {
                for (branch, sign) in [(0usize, 1.0), (1usize, -1.0)] {
                    for (local, weight) in interpolation_weights(&branches[branch], field) {
                        let global = branch_indices[branch][local];
                        *even.entry(global).or_insert(0.0) += 0.5 * weight;
                        *odd.entry(global).or_insert(0.0) += sign * 0.5 * weight;
                    }
                }
            }
            // One branch as measured: rho_xx even, rho_xy odd (mirrored for a negative
            // branch), and the odd part 0 at the zero-field node by symmetry.
            Some(sign) => {
                for (local, weight) in interpolation_weights(&branches[0], field) {
                    let global = branch_indices[0][local];
                    *even.entry(global).or_insert(0.0) += weight;
                    let at_zero = zero_node.is_some() && global == 0;
                    *odd.entry(global).or_insert(0.0) += if at_zero { 0.0 } else { sign * weight };
                }
            }
        }
        let combine = |coefficients: &BTreeMap<usize, f64>, value: &dyn Fn(&Node) -> f64| -> f64 {
            coefficients.iter().map(|(i, c)| c * value(&nodes[*i])).sum()
        };
        let rho_xx = combine(&even, &|n| n.rho_xx);
        let rho_xy = combine(&odd, &|n| n.rho_xy);
        let (rho_xx_odd, rho_xy_even) = match single_sign {
            None => (combine(&odd, &|n| n.rho_xx), combine(&even, &|n| n.rho_xy)),
            // One branch measures the parts of the wrong parity only at zero field, where
            // the odd part vanishes and the even part is the measured offset.
            Some(_) if field == 0.0 && zero_node.is_some() => (0.0, nodes[0].rho_xy),
            Some(_) => (f64::NAN, f64::NAN),
        };
        let uncertainty = with_uncertainty.then(|| {
            let var_xx: f64 = even.iter().map(|(i, c)| c * c * nodes[*i].var_xx).sum();
            let var_xy: f64 = odd.iter().map(|(i, d)| d * d * nodes[*i].var_xy).sum();
            let cov: f64 = even
                .iter()
                .map(|(i, c)| c * odd.get(i).copied().unwrap_or(0.0) * nodes[*i].cov)
                .sum();
            let (sd_xx, sd_xy) = (var_xx.sqrt(), var_xy.sqrt());
            ResistivityUncertainty {
                rho_xx_ohm_sq: sd_xx,
                rho_xy_ohm: sd_xy,
                correlation: if sd_xx > 0.0 && sd_xy > 0.0 {
                    (cov / (sd_xx * sd_xy)).clamp(-1.0, 1.0)
                } else {
                    0.0
                },
            }
        });
        if single_sign.is_none() {
            max_xx_asym = max_xx_asym.max(rho_xx_odd.abs() / rho_xx);
            max_xy_asym = max_xy_asym.max(rho_xy_even.abs() / rho_xx);
        }
        output.push(SymmetrizedPoint {
            field_t: field,
            rho_xx_ohm_sq: rho_xx,
            rho_xy_ohm: rho_xy,
            uncertainty,
            rho_xx_odd_ohm_sq: rho_xx_odd,
            rho_xy_even_ohm: rho_xy_even,
        });
    }
    Ok(Symmetrized {
        points: output,
        overlap_t: (low, high),
        positive_points,
        negative_points,
        zero_field_points,
        points_outside_overlap,
        max_rho_xx_asymmetry: if single_sign.is_none() { max_xx_asym } else { f64::NAN },
        max_rho_xy_asymmetry: if single_sign.is_none() { max_xy_asym } else { f64::NAN },
        single_field_sign: single_sign.is_some(),
        measured_max_field_t: points.iter().map(|p| p.field_t.abs()).fold(0.0, f64::max),
        repeats,
    })
}

/// The merged points among `used` nodes and those whose readings disagree beyond the limit.
fn repeat_summary<'a>(used: impl Iterator<Item = &'a Node>, stated_uncertainties: bool) -> RepeatSummary {
    let limit = if stated_uncertainties {
        REPEAT_BIRGE_RATIO_LIMIT
    } else {
        REPEAT_RELATIVE_SPREAD_LIMIT
    };
    let mut summary = RepeatSummary {
        stated_uncertainties,
        ..RepeatSummary::default()
    };
    for node in used.filter(|n| n.count > 1) {
        summary.merged_points += 1;
        summary.widened_points += usize::from(node.widened);
        summary
            .disagreements
            .extend(node.spread.iter().flatten().filter(|s| s.measure > limit));
    }
    summary
}

/// Propagates the covariance of (a, b) through the inversion (a, b) -> (a, b) / (a^2 + b^2):
/// returns the standard uncertainties of the two outputs and their correlation.
fn propagate_inversion(a: f64, b: f64, sd_a: f64, sd_b: f64, correlation: f64) -> (f64, f64, f64) {
    let scale = a.abs().max(b.abs());
    let (u, v) = (a / scale, b / scale);
    let d2 = (u * u + v * v).powi(2) * scale * scale;
    let j = [
        [(v * v - u * u) / d2, -2.0 * u * v / d2],
        [-2.0 * u * v / d2, (u * u - v * v) / d2],
    ];
    let cov_in = [
        [sd_a * sd_a, correlation * sd_a * sd_b],
        [correlation * sd_a * sd_b, sd_b * sd_b],
    ];
    let mut cov_out = [[0.0; 2]; 2];
    for (r, row) in cov_out.iter_mut().enumerate() {
        for (c, entry) in row.iter_mut().enumerate() {
            *entry = (0..2)
                .flat_map(|k| (0..2).map(move |l| (k, l)))
                .map(|(k, l)| j[r][k] * cov_in[k][l] * j[c][l])
                .sum();
        }
    }
    let (sd_x, sd_y) = (cov_out[0][0].max(0.0).sqrt(), cov_out[1][1].max(0.0).sqrt());
    let rho = if sd_x > 0.0 && sd_y > 0.0 {
        (cov_out[0][1] / (sd_x * sd_y)).clamp(-1.0, 1.0)
    } else {
        0.0
    };
    (sd_x, sd_y, rho)
}

/// The conductivity tensor of a resistivity point, with its uncertainties propagated.
pub fn conductivity_point(point: &SweepPoint) -> TensorPoint {
    let sigma = ResistivityTensor {
        rho_xx_ohm_sq: point.rho_xx_ohm_sq,
        rho_xy_ohm: point.rho_xy_ohm,
    }
    .to_conductivity();
    TensorPoint {
        field_t: point.field_t,
        sigma_xx_s: sigma.sigma_xx_s,
        sigma_xy_s: sigma.sigma_xy_s,
        uncertainty: point.uncertainty.map(|u| {
            let (sigma_xx_s, sigma_xy_s, correlation) = propagate_inversion(
                point.rho_xx_ohm_sq,
                point.rho_xy_ohm,
                u.rho_xx_ohm_sq,
                u.rho_xy_ohm,
                u.correlation,
            );
            TensorUncertainty {
                sigma_xx_s,
                sigma_xy_s,
                correlation,
            }
        }),
    }
}

/// The resistivity tensor of a conductivity point, with its uncertainties propagated.
pub fn resistivity_point(point: &TensorPoint) -> SweepPoint {
    let (rho_xx_ohm_sq, rho_xy_ohm) = invert_tensor(point.sigma_xx_s, point.sigma_xy_s);
    SweepPoint {
        field_t: point.field_t,
        rho_xx_ohm_sq,
        rho_xy_ohm,
        uncertainty: point.uncertainty.map(|u| {
            let (sd_xx, sd_xy, correlation) = propagate_inversion(
                point.sigma_xx_s,
                point.sigma_xy_s,
                u.sigma_xx_s,
                u.sigma_xy_s,
                u.correlation,
            );
            ResistivityUncertainty {
                rho_xx_ohm_sq: sd_xx,
                rho_xy_ohm: sd_xy,
                correlation,
            }
        }),
    }
}

/// The conductivity tensor of every point of a symmetrized sweep, in order.
pub fn conductivity_points(symmetrized: &Symmetrized) -> Vec<TensorPoint> {
    symmetrized
        .points
        .iter()
        .map(|p| conductivity_point(&p.to_sweep_point()))
        .collect()
}

/// A value with an optional standard uncertainty.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Measured {
    pub value: f64,
    pub unc: Option<f64>,
}

impl Measured {
    pub fn new(value: f64, unc: Option<f64>) -> Self {
        Measured { value, unc }
    }
}

/// The conducting thickness of a 3D sample, for sheet <-> volume conversions.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Thickness {
    value_m: f64,
    unc_m: Option<f64>,
}

impl Thickness {
    /// A positive finite thickness and an optional non-negative standard uncertainty.
    pub fn new(value_m: f64, unc_m: Option<f64>) -> Result<Self, SweepError> {
        if !(value_m.is_finite() && value_m > 0.0) {
            return Err(SweepError::InvalidThickness { value: value_m });
        }
        if let Some(unc) = unc_m {
            if !(unc.is_finite() && unc >= 0.0) {
                return Err(SweepError::InvalidThicknessUncertainty { value: unc });
            }
        }
        Ok(Thickness { value_m, unc_m })
    }

    pub fn value_m(&self) -> f64 {
        self.value_m
    }

    pub fn unc_m(&self) -> Option<f64> {
        self.unc_m
    }

    /// x t with the uncertainties in quadrature.
    fn times(&self, x: Measured) -> Measured {
        let t = self.value_m;
        let unc = match (x.unc, self.unc_m) {
            (None, None) => None,
            (ux, ut) => Some(((ux.unwrap_or(0.0) * t).powi(2) + (x.value * ut.unwrap_or(0.0)).powi(2)).sqrt()),
        };
        Measured::new(x.value * t, unc)
    }

    /// x / t with the uncertainties in quadrature.
    fn over(&self, x: Measured) -> Measured {
        let t = self.value_m;
        let unc = match (x.unc, self.unc_m) {
            (None, None) => None,
            (ux, ut) => {
                Some(((ux.unwrap_or(0.0) / t).powi(2) + (x.value * ut.unwrap_or(0.0) / (t * t)).powi(2)).sqrt())
            }
        };
        Measured::new(x.value / t, unc)
    }

    /// Volume resistivity rho = rho_sheet t (either tensor component), ohm m.
    pub fn volume_resistivity_ohm_m(&self, sheet_ohm: Measured) -> Measured {
        self.times(sheet_ohm)
    }

    /// Volume conductivity sigma = sigma_sheet / t, S/m.
    pub fn volume_conductivity_s_per_m(&self, sheet_s: Measured) -> Measured {
        self.over(sheet_s)
    }

    /// Volume density n = n_sheet / t, m^-3.
    pub fn volume_density_m3(&self, sheet_density_m2: Measured) -> Measured {
        self.over(sheet_density_m2)
    }

    /// Sheet resistivity rho_sheet = rho / t from a volume resistivity, ohm (per square).
    pub fn sheet_resistivity_ohm(&self, volume_ohm_m: Measured) -> Measured {
        self.over(volume_ohm_m)
    }
}
