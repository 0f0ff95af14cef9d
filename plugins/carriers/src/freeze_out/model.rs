//! The exact charge-neutrality model that the freeze-out fit evaluates.
//!
//! For the majority carriers (electrons of density n in an n-type crystal; the p-type case
//! is the mirror image with the roles of the bands and of donors and acceptors swapped) the
//! condition p + N_D+ = n + N_A- of `mobilis_physics::forward::statistics` is, with Boltzmann
//! statistics,
//!
//! - N_D+ = N_D / (1 + n / K_D), K_D = (Nc / g_D) exp(-E_D / kT);
//! - p = n_i^2 / n, n_i^2 = Nc Nv exp(-Eg(T) / kT) (Varshni gap);
//! - N_A- = N_A / (1 + p / K_A), K_A = (Nv / g_A) exp(-E_A / kT) when the compensating level is
//!   given, N_A- = N_A (fully ionized) when it is not.
//!
//! All four terms are functions of n alone, and the balance
//! h(x) = ln(n + N_A-) - ln(p + N_D+), x = ln n, is strictly increasing in x (each term moves
//! the right way), so there is exactly one root. It is found by Newton's method in x with a
//! bracket (bisection whenever a Newton step would leave it), starting from the closed-form
//! root of the compensated single-donor equation (holes and acceptor occupancy neglected;
//! Blakemore, Semiconductor Statistics, 1962; Look, Electrical Characterization of GaAs
//! Materials and Devices, 1989), which is already exact wherever those are negligible: two or
//! three steps reach rounding. The far end of the bracket is searched for only when a step
//! depends on it (rarely), and the iterates are the same as if it had been found first.
//! Everything is evaluated in logarithms (log-sum-exp, softplus), so densities from 1e-100
//! to 1e30 m^-3 cost the same and nothing underflows.
//!
//! This is the same physics as `solve_charge_neutrality` (a test compares them to 1e-10), but
//! about fifty times cheaper than its bisection to the last bit, which matters because a fit
//! evaluates it thousands of times.

use mobilis_physics::constants::BOLTZMANN_EV_PER_K;
use mobilis_physics::forward::statistics::BandModel;

use crate::carrier_type::CarrierType;

/// The level of the compensating species, when its occupancy is to be modelled.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CompensatingLevel {
    /// Distance of the level from its own band edge (acceptors above the valence band,
    /// donors below the conduction band), eV.
    pub ionization_energy_ev: f64,
    /// Its degeneracy (4 for acceptors, 2 for donors usually).
    pub degeneracy: f64,
}

/// A compensated semiconductor with one majority dopant level, as the freeze-out fit models
/// it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FreezeOutModel {
    pub carrier_type: CarrierType,
    pub bands: BandModel,
    /// Majority dopant density (donors for n-type), m^-3.
    pub dopant_density_m3: f64,
    /// Compensating dopant density (acceptors for n-type), m^-3; below the dopant density.
    pub compensating_density_m3: f64,
    /// Majority level below its band edge (E_c - E_D for donors), eV.
    pub ionization_energy_ev: f64,
    /// Majority level degeneracy (2 for donors, 4 for acceptors by default).
    pub degeneracy: f64,
    /// `None`: the compensating centres are fully ionized.
    pub compensating_level: Option<CompensatingLevel>,
}

/// What the model needs of one temperature, computed once per data point.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct TemperatureTerms {
    /// 1 / kT, eV^-1.
    pub inverse_thermal_ev: f64,
    /// ln of the majority band's effective density of states, ln(m^-3).
    pub ln_majority_dos: f64,
    /// ln of the minority band's effective density of states.
    pub ln_minority_dos: f64,
    /// ln n_i^2.
    pub ln_intrinsic_squared: f64,
}

impl TemperatureTerms {
    pub fn new(bands: &BandModel, carrier_type: CarrierType, temperature_k: f64) -> Self {
        let inverse_thermal_ev = 1.0 / (BOLTZMANN_EV_PER_K * temperature_k);
        let ln_conduction = bands.conduction_dos_m3(temperature_k).ln();
        let ln_valence = bands.valence_dos_m3(temperature_k).ln();
        let (ln_majority_dos, ln_minority_dos) = match carrier_type {
            CarrierType::N => (ln_conduction, ln_valence),
            CarrierType::P => (ln_valence, ln_conduction),
        };
        TemperatureTerms {
            inverse_thermal_ev,
            ln_majority_dos,
            ln_minority_dos,
            ln_intrinsic_squared: ln_conduction + ln_valence - bands.band_gap_ev(temperature_k) * inverse_thermal_ev,
        }
    }
}

/// The model's parameters in the form the solver uses.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct LevelParameters {
    pub ln_dopant: f64,
    /// ln of the compensating density; -inf when there is none.
    pub ln_compensating: f64,
    /// ln(dopant - compensating): given separately so that heavy compensation keeps its
    /// digits.
    pub ln_net: f64,
    pub ionization_energy_ev: f64,
    pub ln_degeneracy: f64,
    /// (ionization energy, ln degeneracy) of the compensating level.
    pub compensating_level: Option<(f64, f64)>,
    /// N_comp / N_maj and N_net / N_maj, e^(ln_compensating - ln_dopant) and
    /// e^(ln_net - ln_dopant): the closed-form root needs them at every temperature, and
    /// they do not depend on it ([`LevelParameters::with_ratios`]).
    pub compensating_ratio: f64,
    pub net_ratio: f64,
}

impl LevelParameters {
    /// Fills in the two ratios from the logarithms (the same operations as at each point,
    /// done once per parameter set).
    pub fn with_ratios(mut self) -> Self {
        self.compensating_ratio = (self.ln_compensating - self.ln_dopant).exp();
        self.net_ratio = (self.ln_net - self.ln_dopant).exp();
        self
    }
}

/// softplus(z) = ln(1 + e^z) without overflow or loss of precision, and the logistic
/// sigmoid 1 / (1 + e^-z) (its derivative), from one exponential: both need e^-|z|, and the
/// solver evaluates them together at every step. The operations are those of the two
/// separate textbook forms, so the values are the same to the last bit.
fn softplus_and_sigmoid(z: f64) -> (f64, f64) {
    let e = (-z.abs()).exp();
    let softplus = z.max(0.0) + e.ln_1p();
    let sigmoid = if z >= 0.0 { 1.0 / (1.0 + e) } else { e / (1.0 + e) };
    (softplus, sigmoid)
}

/// e^(a - largest) for a term of a log-sum-exp: exactly 1 for the largest term itself
/// (e^0), which saves one exponential per call without changing a bit.
fn exp_relative(a: f64, largest: f64) -> f64 {
    if a == largest && largest.is_finite() {
        1.0
    } else {
        (a - largest).exp()
    }
}

/// ln(e^a + e^b) and the weight e^a / (e^a + e^b); -inf terms allowed.
fn log_sum_exp(a: f64, b: f64) -> (f64, f64) {
    let (largest, ea, eb) = if a.is_finite() && b.is_finite() {
        // The usual case: the larger term is e^0 = 1 without testing each term against the
        // largest (and a tie's other e^0 is 1 as well).
        if a >= b {
            (a, 1.0, (b - a).exp())
        } else {
            (b, (a - b).exp(), 1.0)
        }
    } else {
        let largest = a.max(b);
        if largest == f64::NEG_INFINITY {
            return (f64::NEG_INFINITY, 0.5);
        }
        (largest, exp_relative(a, largest), exp_relative(b, largest))
    };
    let sum = ea + eb;
    // ln 1 is 0 exactly: when the smaller term is below half an ulp of the larger one (the
    // minority carriers against the ionized dopants, wherever the crystal is not
    // intrinsic), the logarithm is not needed.
    let ln_sum = if sum == 1.0 { 0.0 } else { sum.ln() };
    (largest + ln_sum, ea / sum)
}

/// The closed-form root of n (n + N_A) / (N_D - N_A - n) = K in logarithms:
/// n = 2 K (N_D - N_A) / ((N_A + K) + sqrt((N_A + K)^2 + 4 K (N_D - N_A))), evaluated relative
/// to N_D, with the limits K >> N_D (n = N_D - N_A) and K << everything (n = K (N_D - N_A) / N_A,
/// or sqrt(K N_D) without compensation) where the ratio would overflow or underflow.
fn ln_closed_form_root(ln_k: f64, parameters: &LevelParameters) -> f64 {
    let relative = ln_k - parameters.ln_dopant;
    if relative > 600.0 {
        return parameters.ln_net;
    }
    if relative < -600.0 {
        return if parameters.ln_compensating > f64::NEG_INFINITY
            && ln_k - parameters.ln_compensating < 0.5 * (ln_k - parameters.ln_dopant)
        {
            ln_k + parameters.ln_net - parameters.ln_compensating
        } else {
            0.5 * (ln_k + parameters.ln_dopant)
        };
    }
    let k = relative.exp();
    let a = parameters.compensating_ratio;
    let d = parameters.net_ratio;
    let linear = a + k;
    let ratio = 2.0 * k * d / (linear + (linear * linear + 4.0 * k * d).sqrt());
    parameters.ln_dopant + ratio.ln()
}

/// h(x) and h'(x) as in the module documentation at x = ln n, given ln K of the majority
/// level and, when its occupancy is modelled, of the compensating one; "minority" is
/// q = n_i^2 / n.
#[inline(always)]
fn balance(
    terms: &TemperatureTerms,
    parameters: &LevelParameters,
    ln_k: f64,
    ln_k_compensating: Option<f64>,
    x: f64,
) -> (f64, f64) {
    let ln_minority = terms.ln_intrinsic_squared - x;
    let (ln_compensating_ionized, compensating_slope) = match ln_k_compensating {
        Some(ln_kc) => {
            let (softplus, sigmoid) = softplus_and_sigmoid(ln_minority - ln_kc);
            (parameters.ln_compensating - softplus, sigmoid)
        }
        None => (parameters.ln_compensating, 0.0),
    };
    let (softplus, dopant_slope) = softplus_and_sigmoid(x - ln_k);
    let ln_dopant_ionized = parameters.ln_dopant - softplus;
    let (negative, weight_carriers) = log_sum_exp(x, ln_compensating_ionized);
    let (positive, weight_minority) = log_sum_exp(ln_minority, ln_dopant_ionized);
    let derivative = weight_carriers
        + (1.0 - weight_carriers) * compensating_slope
        + weight_minority
        + (1.0 - weight_minority) * dopant_slope;
    (negative - positive, derivative)
}

/// ln of the majority carrier density at one temperature, ln(m^-3).
pub(crate) fn ln_majority_density(terms: &TemperatureTerms, parameters: &LevelParameters) -> f64 {
    let ln_k =
        terms.ln_majority_dos - parameters.ln_degeneracy - parameters.ionization_energy_ev * terms.inverse_thermal_ev;
    let start = ln_closed_form_root(ln_k, parameters);
    // One copy of the search for each case, so that the usual one (compensating centres
    // fully ionized) carries no test of the level through its iterations.
    match parameters.compensating_level {
        None => root_from(start, |x| balance(terms, parameters, ln_k, None, x)),
        Some((energy, ln_degeneracy)) => {
            let ln_k_compensating = terms.ln_minority_dos - ln_degeneracy - energy * terms.inverse_thermal_ev;
            root_from(start, |x| balance(terms, parameters, ln_k, Some(ln_k_compensating), x))
        }
    }
}

/// The root of the strictly increasing `balance` (h and h'), starting from `start`.
fn root_from(start: f64, balance: impl Fn(f64) -> (f64, f64)) -> f64 {
    let (value, start_derivative) = balance(start);
    if value == 0.0 {
        return start;
    }
    if !value.is_finite() {
        return f64::NAN;
    }
    // The end of the bracket beyond the root: h increases with x, so it is the first of
    // start +- 1, 3, 7, ... (steps doubling) where h has changed sign; 40 doublings (a factor
    // e^(2^40)) cover any representable density. `None` if there is none.
    let ascending = value < 0.0;
    let far_end = || -> Option<f64> {
        let mut end = start;
        let mut step = 1.0;
        for _ in 0..40 {
            if ascending {
                end += step;
                if balance(end).0 >= 0.0 {
                    return Some(end);
                }
            } else {
                end -= step;
                if balance(end).0 <= 0.0 {
                    return Some(end);
                }
            }
            step *= 2.0;
        }
        None
    };
    // Safeguarded Newton from the start, in the bracket between the start and the far end.
    // Finding the far end costs at least one evaluation of h, and most solves never need
    // it: the closed form is within a few ulps of the root wherever the minority carriers
    // and the compensating level's occupancy are negligible (the first step then ends the
    // search), and within 1e-6 or so where they are not (two or three steps). So the far
    // end starts as start +- 1, the doubling search's first trial and the nearest the far
    // end can be, and the search runs only when a decision depends on where the far end
    // really is: a step that would leave (start, start + 1) (or (start - 1, start)), or a
    // bracket as narrow as the tolerance. Every other decision comes out the same whatever
    // the far end, so every iterate and the result are those of the bracket found first,
    // to the last bit. (h is strictly increasing and tends to -inf and +inf at the ends, so
    // the search cannot fail once h is finite at the start.)
    let (mut low, mut high) = if ascending {
        (start, start + 1.0)
    } else {
        (start - 1.0, start)
    };
    let mut far_end_known = false;
    let locate_far_end = |low: &mut f64, high: &mut f64| -> bool {
        match far_end() {
            Some(end) if ascending => *high = end,
            Some(end) => *low = end,
            None => return false,
        }
        true
    };
    if 4.0 * f64::EPSILON * start.abs().max(1.0) >= 0.5 {
        // start +- 1 may round to the start itself: the bracket first.
        if !locate_far_end(&mut low, &mut high) {
            return f64::NAN;
        }
        far_end_known = true;
    }
    // The first step is taken from the balance at the start, already known.
    let mut x = start;
    let mut at_x = Some((value, start_derivative));
    for _ in 0..200 {
        let (h, derivative) = at_x.take().unwrap_or_else(|| balance(x));
        if h == 0.0 {
            return x;
        }
        // An iterate beyond the root replaces the far end, wherever it was.
        if h < 0.0 {
            low = x;
            far_end_known |= !ascending;
        } else {
            high = x;
            far_end_known |= ascending;
        }
        let tolerance = 4.0 * f64::EPSILON * x.abs().max(1.0);
        let mut next = x - h / derivative;
        // Inside the provisional bracket and wider than the tolerance, the step's fate is
        // the same whatever the far end.
        let clear_of_far_end = next > low && next < high && high - low > tolerance;
        if !(far_end_known || clear_of_far_end) {
            if !locate_far_end(&mut low, &mut high) {
                return f64::NAN;
            }
            far_end_known = true;
        }
        if !(next > low && next < high) {
            next = 0.5 * (low + high);
        }
        if (next - x).abs() <= tolerance || high - low <= tolerance {
            return next;
        }
        x = next;
    }
    x
}

impl FreezeOutModel {
    pub(crate) fn level_parameters(&self) -> LevelParameters {
        LevelParameters {
            ln_dopant: self.dopant_density_m3.ln(),
            ln_compensating: self.compensating_density_m3.ln(),
            ln_net: (self.dopant_density_m3 - self.compensating_density_m3).ln(),
            ionization_energy_ev: self.ionization_energy_ev,
            ln_degeneracy: self.degeneracy.ln(),
            compensating_level: self
                .compensating_level
                .map(|level| (level.ionization_energy_ev, level.degeneracy.ln())),
            compensating_ratio: f64::NAN,
            net_ratio: f64::NAN,
        }
        .with_ratios()
    }

    /// ln of the majority carrier density at `temperature_k`, ln(m^-3). NaN when the
    /// parameters are unphysical (dopant density not above the compensating density, a
    /// non-positive density or degeneracy).
    pub fn ln_carrier_density(&self, temperature_k: f64) -> f64 {
        let physical = self.dopant_density_m3 > self.compensating_density_m3
            && self.compensating_density_m3 >= 0.0
            && self.degeneracy > 0.0
            && temperature_k > 0.0
            && self.ionization_energy_ev.is_finite()
            && self
                .compensating_level
                .is_none_or(|level| level.degeneracy > 0.0 && level.ionization_energy_ev.is_finite());
        if !physical {
            return f64::NAN;
        }
        let terms = TemperatureTerms::new(&self.bands, self.carrier_type, temperature_k);
        ln_majority_density(&terms, &self.level_parameters())
    }

    /// The majority carrier density at `temperature_k`, m^-3.
    pub fn carrier_density_m3(&self, temperature_k: f64) -> f64 {
        self.ln_carrier_density(temperature_k).exp()
    }
}
