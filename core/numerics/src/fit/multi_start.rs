//! Multi-start: the same problem from several starting points, the best converged run kept.

use super::error::FitError;
use super::lm::{LeastSquares, LmFit, LmOptions, RawRun, Termination};

/// When two converged runs count as the same minimum: both conditions must hold.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SameMinimum {
    /// Largest chi-square difference, in units of the noise variance (1 for weighted
    /// residuals, chi^2 / nu of the best run otherwise). Default 1e-3, far below the
    /// difference of 1 that separates parameter sets at one standard error. Differences
    /// below 1e-12 of the run's starting chi-square are rounding and always agree.
    pub chi_square: f64,
    /// Largest parameter difference in standard errors of the best run. Default 0.1. A
    /// parameter without a standard error (held at a bound) must agree to 1e-6 relative.
    pub standard_errors: f64,
}

impl Default for SameMinimum {
    fn default() -> Self {
        SameMinimum {
            chi_square: 1e-3,
            standard_errors: 0.1,
        }
    }
}

/// What one start gave.
#[derive(Debug, Clone, PartialEq)]
pub struct StartSummary {
    pub parameters: Vec<f64>,
    pub chi_square: f64,
    pub converged: bool,
    pub termination: Termination,
    pub iterations: usize,
    /// Converged and at the best run's minimum (see [`SameMinimum`]).
    pub same_minimum_as_best: bool,
}

/// One start and its outcome (a summary, or why the run failed).
#[derive(Debug, Clone, PartialEq)]
pub struct StartOutcome {
    pub start: Vec<f64>,
    pub result: Result<StartSummary, FitError>,
}

/// The best converged run of a multi-start fit and how the others fared.
#[derive(Debug, Clone, PartialEq)]
pub struct MultiStartFit {
    /// The converged run of lowest chi-square.
    pub best: LmFit,
    /// Its index in the list of starts.
    pub best_start: usize,
    /// Runs that converged.
    pub converged: usize,
    /// Converged runs at the best run's minimum, the best included.
    pub same_minimum: usize,
    /// Every start in the order given.
    pub outcomes: Vec<StartOutcome>,
}

impl MultiStartFit {
    /// Converged starts at the best minimum when parameter sets are compared after
    /// reordering: `canonical(parameters)` lists the indices of `parameters` in a canonical
    /// order (for interchangeable carriers, say, so that a run that found the same carriers
    /// with their labels swapped is the same minimum). Agreement: a chi-square within 1e-3
    /// of the noise variance (1 for weighted residuals, chi^2 / nu otherwise) or 1e-12 of
    /// the best chi-square, and every parameter within 0.1 standard errors of the best run's
    /// (the default tolerances of [`SameMinimum`]); a parameter without a standard error
    /// must agree to 1e-6 of max(|value|, 1).
    pub fn starts_at_best_minimum_reordered(&self, canonical: impl Fn(&[f64]) -> Vec<usize>) -> usize {
        let best = &self.best;
        let best_order = canonical(&best.parameters);
        let variance = if best.residuals_are_weighted {
            1.0
        } else {
            best.reduced_chi_square
        };
        self.outcomes
            .iter()
            .filter_map(|outcome| outcome.result.as_ref().ok())
            .filter(|summary| {
                if !summary.converged
                    || (summary.chi_square - best.chi_square).abs() > 1e-3 * variance + 1e-12 * best.chi_square
                {
                    return false;
                }
                let order = canonical(&summary.parameters);
                order.iter().zip(&best_order).all(|(&j, &jb)| {
                    let difference = (summary.parameters[j] - best.parameters[jb]).abs();
                    let error = best.standard_errors[jb];
                    if error.is_finite() && error > 0.0 {
                        difference <= 0.1 * error
                    } else {
                        difference <= 1e-6 * best.parameters[jb].abs().max(1.0)
                    }
                })
            })
            .count()
    }
}

impl LeastSquares<'_> {
    /// Runs [`LeastSquares::minimize`] from each start and keeps the converged run of lowest
    /// chi-square. Fails with [`FitError::NotConverged`] when runs finished but none
    /// converged, and with the first start's error when every run failed.
    pub fn minimize_multi_start(
        &self,
        starts: &[Vec<f64>],
        options: &LmOptions,
        same_minimum: &SameMinimum,
    ) -> Result<MultiStartFit, FitError> {
        check_multi_start(starts, same_minimum)?;
        let runs: Vec<Result<RawRun, FitError>> = starts.iter().map(|start| self.solve(start, options)).collect();
        self.choose_best(starts, runs, options, same_minimum)
    }

    /// The best converged run of `runs` (one per start, in the order of `starts`) and the
    /// agreement of the others with it: the second half of [`Self::minimize_multi_start`].
    fn choose_best(
        &self,
        starts: &[Vec<f64>],
        runs: Vec<Result<RawRun, FitError>>,
        options: &LmOptions,
        same_minimum: &SameMinimum,
    ) -> Result<MultiStartFit, FitError> {
        // The best run is chosen by chi-square before its covariance is computed: a best
        // minimum whose parameters the data do not determine is reported as such
        // (FitError::Singular), not silently replaced by a worse minimum.
        let best_index = runs
            .iter()
            .enumerate()
            .filter_map(|(index, run)| run.as_ref().ok().filter(|raw| raw.converged).map(|raw| (index, raw)))
            .min_by(|a, b| a.1.chi_square().total_cmp(&b.1.chi_square()))
            .map(|(index, _)| index);
        let Some(best_index) = best_index else {
            let finished: Vec<&RawRun> = runs.iter().filter_map(|run| run.as_ref().ok()).collect();
            if finished.is_empty() {
                return Err(runs
                    .into_iter()
                    .next()
                    .and_then(Result::err)
                    .unwrap_or(FitError::NoStarts));
            }
            return Err(FitError::NotConverged {
                starts: starts.len(),
                max_iterations: options.max_iterations,
                best_chi_square: finished
                    .iter()
                    .map(|raw| raw.chi_square())
                    .fold(f64::INFINITY, f64::min),
            });
        };
        let best_raw = runs[best_index].as_ref().expect("the best run succeeded").clone();
        let best = self.finish(best_raw, options)?;
        let variance = if best.residuals_are_weighted {
            1.0
        } else {
            best.reduced_chi_square
        };
        let agrees =
            |raw: &RawRun| -> bool {
                if !raw.converged {
                    return false;
                }
                let difference = (raw.chi_square() - best.chi_square).abs();
                let chi_ok = difference <= same_minimum.chi_square * variance || difference <= 2e-12 * raw.initial_cost;
                let parameters_ok = raw.x.iter().zip(&best.parameters).zip(&best.standard_errors).all(
                    |((value, best_value), error)| {
                        let difference = (value - best_value).abs();
                        if error.is_finite() && *error > 0.0 {
                            difference <= same_minimum.standard_errors * error
                        } else {
                            difference <= 1e-6 * value.abs().max(best_value.abs()) || difference == 0.0
                        }
                    },
                );
                chi_ok && parameters_ok
            };
        let mut converged = 0;
        let mut same = 0;
        let outcomes: Vec<StartOutcome> = starts
            .iter()
            .zip(runs)
            .map(|(start, run)| StartOutcome {
                start: start.clone(),
                result: run.map(|raw| {
                    let same_minimum_as_best = agrees(&raw);
                    converged += usize::from(raw.converged);
                    same += usize::from(same_minimum_as_best);
                    StartSummary {
                        chi_square: raw.chi_square(),
                        parameters: raw.x,
                        converged: raw.converged,
                        termination: raw.termination,
                        iterations: raw.iterations,
                        same_minimum_as_best,
                    }
                }),
            })
            .collect();
        Ok(MultiStartFit {
            best,
            best_start: best_index,
            converged,
            same_minimum: same,
            outcomes,
        })
    }
}

/// The checks [`LeastSquares::minimize_multi_start`] makes before any run.
fn check_multi_start(starts: &[Vec<f64>], same_minimum: &SameMinimum) -> Result<(), FitError> {
    if starts.is_empty() {
        return Err(FitError::NoStarts);
    }
    for (name, value) in [
        ("same_minimum.chi_square", same_minimum.chi_square),
        ("same_minimum.standard_errors", same_minimum.standard_errors),
    ] {
        if !(value.is_finite() && value >= 0.0) {
            return Err(FitError::InvalidOption {
                name,
                value,
                requirement: "give a finite tolerance of 0 or more",
            });
        }
    }
    Ok(())
}

/// [`LeastSquares::minimize_multi_start`] with the runs spread over the threads of the
/// rayon pool. The runs are independent and each is computed exactly as in the serial
/// call, then chosen among in the order of `starts`, so the result is the same to the last
/// bit. `problem` builds the problem once per run (a [`LeastSquares`] holds its residual
/// function as a plain closure, which need not be shareable between threads; the data it
/// borrows must be).
pub fn minimize_multi_start_parallel<'a>(
    problem: impl Fn() -> LeastSquares<'a> + Sync,
    starts: &[Vec<f64>],
    options: &LmOptions,
    same_minimum: &SameMinimum,
) -> Result<MultiStartFit, FitError> {
    use rayon::prelude::*;
    check_multi_start(starts, same_minimum)?;
    let runs: Vec<Result<RawRun, FitError>> = starts.par_iter().map(|start| problem().solve(start, options)).collect();
    problem().choose_best(starts, runs, options, same_minimum)
}
