//! Peaks of the 1/B spectrum (step 5 of the parent module's documentation).

use mobilis_numerics::fft::{AmplitudeSpectrum, Window};

/// Half the width of the window's main lobe, in units of the record's resolution 1/span:
/// peaks closer than 1.5 times this to a stronger one are its own lobe, not a line.
pub(super) fn main_lobe_half_width(window: Window) -> f64 {
    match window {
        Window::Rectangular => 1.0,
        Window::Hann => 2.0,
        Window::Blackman => 3.0,
    }
}

/// The noise level of a peak is the median amplitude within this many resolutions (or half
/// the peak's frequency, if more) on either side, inside the searched band: wide enough that
/// the line's own main lobe is a small part of it.
pub const LOCAL_MEDIAN_RESOLUTIONS: f64 = 20.0;

/// A line of the spectrum, interpolated between bins.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(super) struct Peak {
    pub frequency_t: f64,
    pub amplitude: f64,
    /// Amplitude over the median amplitude around it (see [`LOCAL_MEDIAN_RESOLUTIONS`]).
    pub ratio_to_median: f64,
}

/// What the search found.
#[derive(Debug, Clone, PartialEq)]
pub(super) enum PeakSearch {
    /// Lines, strongest first.
    Found(Vec<Peak>),
    /// The strongest feature lies below the lowest frequency searched.
    TooFewPeriods { frequency_t: f64 },
    /// Nothing stands out; the best ratio to the median.
    Nothing { best_ratio: f64 },
}

/// What the search needs besides the spectrum.
pub(super) struct SearchLimits {
    pub lowest_t: f64,
    pub highest_t: f64,
    pub count: usize,
    pub window: Window,
    pub min_ratio: f64,
    pub min_relative_amplitude: f64,
}

/// The vertex of the parabola through bins k - 1, k, k + 1: (offset in bins, height).
fn parabolic_vertex(left: f64, centre: f64, right: f64) -> (f64, f64) {
    let curvature = left - 2.0 * centre + right;
    if curvature >= 0.0 {
        return (0.0, centre);
    }
    let offset = (0.5 * (left - right) / curvature).clamp(-0.5, 0.5);
    (offset, centre - 0.25 * (left - right) * offset)
}

fn local_maxima(amplitudes: &[f64], from: usize, to: usize) -> Vec<usize> {
    (from.max(1)..to.min(amplitudes.len() - 1))
        .filter(|&k| amplitudes[k] > amplitudes[k - 1] && amplitudes[k] >= amplitudes[k + 1])
        .collect()
}

/// Lines of `spectrum` between the limits: local maxima at least `min_ratio` times the
/// median amplitude around them and `min_relative_amplitude` times the strongest line, outside
/// the main lobe of any stronger line, at most `count`, strongest first.
pub(super) fn find_peaks(spectrum: &AmplitudeSpectrum, limits: &SearchLimits) -> PeakSearch {
    let bin = spectrum.bin_width;
    let amplitudes = &spectrum.amplitudes;
    let first = (limits.lowest_t / bin).ceil() as usize;
    let last = ((limits.highest_t / bin).floor() as usize).min(amplitudes.len() - 1);
    if first >= last {
        return PeakSearch::Nothing { best_ratio: 0.0 };
    }
    // The noise level is the median amplitude near the peak, not over the whole band: the
    // spline that resamples onto the 1/B grid passes noise only up to the Nyquist frequency
    // of the sweep's own sampling, which is lowest at B_min, so the noise spectrum falls
    // toward high frequencies and a band-wide median would understate it at low ones.
    let half_width = LOCAL_MEDIAN_RESOLUTIONS * spectrum.resolution;
    let local_median = |frequency: f64| {
        let from = (((frequency - half_width.max(0.5 * frequency)) / bin).ceil() as usize).max(first);
        let to = (((frequency + half_width.max(0.5 * frequency)) / bin).floor() as usize).min(last);
        let mut near: Vec<f64> = amplitudes[from.min(to)..=to].to_vec();
        let middle = near.len() / 2;
        near.select_nth_unstable_by(middle, f64::total_cmp);
        near[middle].max(f64::MIN_POSITIVE)
    };
    // The median is taken only for the peaks the search looks at, strongest first: its
    // neighbourhood grows with the frequency, so taking it at every local maximum of a long
    // sweep's spectrum would cost the square of the bins.
    let refine = |k: usize| {
        let (offset, height) = parabolic_vertex(amplitudes[k - 1], amplitudes[k], amplitudes[k + 1]);
        Peak {
            frequency_t: (k as f64 + offset) * bin,
            amplitude: height,
            ratio_to_median: f64::NAN,
        }
    };
    let with_ratio = |peak: Peak| Peak {
        ratio_to_median: peak.amplitude / local_median(peak.frequency_t.max(limits.lowest_t)),
        ..peak
    };
    let mut candidates: Vec<Peak> = local_maxima(amplitudes, first, last + 1)
        .into_iter()
        .map(refine)
        .collect();
    candidates.sort_by(|a, b| b.amplitude.total_cmp(&a.amplitude));
    let best_ratio = candidates.first().map_or(0.0, |p| with_ratio(*p).ratio_to_median);
    // Below the band: a feature stronger than every line above it, and itself out of the
    // noise, is the oscillation (or left-over background) with too few periods.
    let below = local_maxima(amplitudes, 1, first)
        .into_iter()
        .map(refine)
        .max_by(|a, b| a.amplitude.total_cmp(&b.amplitude))
        .map(with_ratio);
    if let Some(low) = below {
        let strongest = candidates.first().map_or(0.0, |p| p.amplitude);
        if low.amplitude > strongest && low.ratio_to_median >= limits.min_ratio {
            return PeakSearch::TooFewPeriods {
                frequency_t: low.frequency_t,
            };
        }
    }
    let exclusion = 1.5 * main_lobe_half_width(limits.window) * spectrum.resolution;
    let mut accepted: Vec<Peak> = Vec::new();
    for candidate in candidates {
        if accepted.len() == limits.count {
            break;
        }
        let candidate = with_ratio(candidate);
        if candidate.ratio_to_median < limits.min_ratio {
            break;
        }
        if let Some(strongest) = accepted.first() {
            if candidate.amplitude < limits.min_relative_amplitude * strongest.amplitude {
                break;
            }
        }
        if accepted
            .iter()
            .all(|line| (line.frequency_t - candidate.frequency_t).abs() >= exclusion)
        {
            accepted.push(candidate);
        }
    }
    if accepted.is_empty() {
        PeakSearch::Nothing { best_ratio }
    } else {
        PeakSearch::Found(accepted)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use mobilis_numerics::fft::amplitude_spectrum;
    use std::f64::consts::PI;

    // Two cosines of different amplitude are found strongest first at their frequencies
    // (to a fraction of the resolution), and a third line asked for is not invented.
    #[test]
    fn spectrum_finds_two_lines_and_no_third() {
        let spacing = 1e-3;
        let samples: Vec<f64> = (0..1000)
            .map(|k| {
                let x = k as f64 * spacing;
                (2.0 * PI * 31.3 * x).cos() + 0.3 * (2.0 * PI * 77.0 * x + 1.0).cos()
            })
            .collect();
        let spectrum = amplitude_spectrum(&samples, spacing, Window::Hann, 8);
        let limits = SearchLimits {
            lowest_t: 2.0,
            highest_t: 400.0,
            count: 3,
            window: Window::Hann,
            min_ratio: 6.0,
            min_relative_amplitude: 0.05,
        };
        let PeakSearch::Found(peaks) = find_peaks(&spectrum, &limits) else {
            panic!("no peaks");
        };
        assert_eq!(peaks.len(), 2, "{peaks:?}");
        assert!((peaks[0].frequency_t - 31.3).abs() < 0.05, "{peaks:?}");
        assert!((peaks[1].frequency_t - 77.0).abs() < 0.05, "{peaks:?}");
        assert!((peaks[0].amplitude - 1.0).abs() < 0.02 && (peaks[1].amplitude - 0.3).abs() < 0.01);
    }

    // 1.5 periods in the record: the line lies below two periods and is reported as such.
    #[test]
    fn spectrum_reports_too_few_periods() {
        let spacing = 1e-3;
        let samples: Vec<f64> = (0..1000).map(|k| (2.0 * PI * 1.5 * k as f64 * spacing).cos()).collect();
        let mut rng = mobilis_numerics::noise::Rng::seeded(4);
        let noisy: Vec<f64> = samples.iter().map(|v| v + 0.01 * rng.standard_normal()).collect();
        let spectrum = amplitude_spectrum(&noisy, spacing, Window::Hann, 8);
        let limits = SearchLimits {
            lowest_t: 2.0,
            highest_t: 400.0,
            count: 1,
            window: Window::Hann,
            min_ratio: 6.0,
            min_relative_amplitude: 0.05,
        };
        assert!(
            matches!(find_peaks(&spectrum, &limits), PeakSearch::TooFewPeriods { frequency_t } if frequency_t < 2.0),
            "{:?}",
            find_peaks(&spectrum, &limits)
        );
    }
}
