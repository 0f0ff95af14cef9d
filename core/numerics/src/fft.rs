//! The discrete Fourier transform of any length, spectral windows, and the amplitude
//! spectrum of a uniformly sampled real signal.
//!
//! # Transform
//!
//! [`fft`] computes X_k = sum_j x_j exp(-2 pi i j k / N), [`inverse_fft`] its inverse with
//! the 1/N factor, in place, for any N:
//!
//! - N a power of two: the iterative radix-2 Cooley-Tukey algorithm (Cooley and Tukey,
//!   Math. Comput. 19, 297, 1965): bit-reversal permutation, then log2 N stages of
//!   butterflies. The twiddle factors come from one table of cos and sin of 2 pi j / N
//!   computed directly (not by repeated multiplication, which accumulates rounding), so the
//!   error grows like log N.
//! - any other N: Bluestein's chirp-z algorithm (Bluestein, IEEE Trans. Audio Electroacoust.
//!   18, 451, 1970). With jk = (j^2 + k^2 - (k - j)^2) / 2 the transform becomes a
//!   convolution with the chirp exp(i pi m^2 / N), done by radix-2 transforms of a power of
//!   two M >= 2N - 1. The chirp's argument is reduced with m^2 mod 2N in integers, so it
//!   stays exact for large m. O(N log N) for every N, prime lengths included.
//!
//! # Windows
//!
//! A finite record is a signal multiplied by a window; a rectangular window leaks a strong
//! line into its neighbours through sidelobes at -13 dB, which can hide a weak second
//! frequency. [`Window::Hann`] (sidelobes -31 dB, falling as 1/f^3) is the default of the
//! analyses; [`Window::Blackman`] (-58 dB) separates lines of very different amplitude at the
//! cost of a wider main lobe. The windows are the symmetric forms of Harris (Proc. IEEE 66,
//! 51, 1978), w_j = f(j / (N - 1)), zero (Hann) or nearly zero (Blackman) at both ends:
//! the record is a piece of data, not one period of a periodic signal.
//!
//! # Amplitude spectrum
//!
//! [`amplitude_spectrum`] multiplies the samples by the window, appends zeros up to a
//! power of two at least `padding_factor` times the record length, transforms, and scales
//! |X_k| by 2 / sum w_j, the inverse coherent gain: a sinusoid A cos(2 pi f x + phi) whose
//! frequency falls on a bin then shows amplitude A (exactly for a sinusoid that fills the
//! record, up to the leakage of its negative-frequency image). Zero padding interpolates the
//! spectrum between the bins of the unpadded record; it does not improve the resolution,
//! which stays about 1 / (record length) (twice that for Hann, three times for Blackman).
//! The caller removes the mean (or the background) first: a large constant leaks into the
//! low-frequency bins through the window's main lobe.

use std::f64::consts::PI;
use std::ops::{Add, AddAssign, Mul, Sub};
use std::sync::{Arc, Mutex};

/// A complex number: what the transforms work on.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct Complex {
    pub re: f64,
    pub im: f64,
}

impl Complex {
    pub const ZERO: Complex = Complex { re: 0.0, im: 0.0 };

    pub fn new(re: f64, im: f64) -> Self {
        Complex { re, im }
    }

    /// r exp(i theta).
    pub fn from_polar(r: f64, theta: f64) -> Self {
        Complex {
            re: r * theta.cos(),
            im: r * theta.sin(),
        }
    }

    pub fn conj(self) -> Self {
        Complex {
            re: self.re,
            im: -self.im,
        }
    }

    /// |z|, without overflow of the squares.
    pub fn abs(self) -> f64 {
        self.re.hypot(self.im)
    }

    /// The argument in (-pi, pi].
    pub fn arg(self) -> f64 {
        self.im.atan2(self.re)
    }

    pub fn scale(self, factor: f64) -> Self {
        Complex {
            re: self.re * factor,
            im: self.im * factor,
        }
    }
}

impl Add for Complex {
    type Output = Complex;
    fn add(self, other: Complex) -> Complex {
        Complex::new(self.re + other.re, self.im + other.im)
    }
}

impl AddAssign for Complex {
    fn add_assign(&mut self, other: Complex) {
        self.re += other.re;
        self.im += other.im;
    }
}

impl Sub for Complex {
    type Output = Complex;
    fn sub(self, other: Complex) -> Complex {
        Complex::new(self.re - other.re, self.im - other.im)
    }
}

impl Mul for Complex {
    type Output = Complex;
    fn mul(self, other: Complex) -> Complex {
        Complex::new(
            self.re * other.re - self.im * other.im,
            self.re * other.im + self.im * other.re,
        )
    }
}

/// The forward transform X_k = sum_j x_j exp(-2 pi i j k / N), in place, any length.
pub fn fft(data: &mut [Complex]) {
    transform(data, false);
}

/// The inverse transform x_j = (1/N) sum_k X_k exp(+2 pi i j k / N), in place, any length.
pub fn inverse_fft(data: &mut [Complex]) {
    transform(data, true);
    let n = data.len();
    if n > 0 {
        let factor = 1.0 / n as f64;
        for value in data.iter_mut() {
            *value = value.scale(factor);
        }
    }
}

/// The unnormalized transform in either direction.
fn transform(data: &mut [Complex], inverse: bool) {
    let n = data.len();
    if n <= 1 {
        return;
    }
    if n.is_power_of_two() {
        radix2(data, inverse);
    } else {
        bluestein(data, inverse);
    }
}

/// Iterative radix-2 Cooley-Tukey; `data.len()` must be a power of two.
fn radix2(data: &mut [Complex], inverse: bool) {
    let n = data.len();
    let bits = n.trailing_zeros();
    for i in 0..n {
        let j = i.reverse_bits() >> (usize::BITS - bits);
        if j > i {
            data.swap(i, j);
        }
    }
    butterflies(data, inverse, 2);
}

/// The butterfly stages of radix-2 Cooley-Tukey from sub-transforms of length
/// `first_length` on (data already in bit-reversed order, every block of `first_length / 2`
/// points already transformed). The twiddle factors are those of a table of the largest
/// length seen so far, read with a stride: cos and sin of 2 pi (j s) / (N s) with s a power
/// of two are those of 2 pi j / N bit for bit (scaling by a power of two is exact), so every
/// length gets exactly the factors computed for it alone, without recomputing a table on
/// every call.
fn butterflies(data: &mut [Complex], inverse: bool, first_length: usize) {
    let n = data.len();
    let table = twiddle_table(n, inverse);
    let table_stride = (table.len() * 2) / n;
    let mut length = first_length;
    while length <= n {
        let half = length / 2;
        let stride = table_stride * (n / length);
        for block in data.chunks_exact_mut(length) {
            let (low, high) = block.split_at_mut(half);
            for (j, (even, odd)) in low.iter_mut().zip(high.iter_mut()).enumerate() {
                let twiddled = *odd * table[j * stride];
                let e = *even;
                *even = e + twiddled;
                *odd = e - twiddled;
            }
        }
        length *= 2;
    }
}

/// The twiddle factors exp(sign 2 pi i j / N), j < N/2, of a power of two N at least `n`,
/// computed once per direction for the largest length asked for so far and shared (a
/// transform of length n reads every (N/n)-th factor).
fn twiddle_table(n: usize, inverse: bool) -> Arc<Vec<Complex>> {
    static TABLES: Mutex<[Option<Arc<Vec<Complex>>>; 2]> = Mutex::new([None, None]);
    let slot = usize::from(inverse);
    let mut tables = TABLES.lock().unwrap_or_else(|poisoned| poisoned.into_inner());
    if let Some(table) = &tables[slot] {
        if table.len() * 2 >= n {
            return Arc::clone(table);
        }
    }
    let sign = if inverse { 1.0 } else { -1.0 };
    let table: Arc<Vec<Complex>> = Arc::new(
        (0..n / 2)
            .map(|j| Complex::from_polar(1.0, sign * 2.0 * PI * j as f64 / n as f64))
            .collect(),
    );
    tables[slot] = Some(Arc::clone(&table));
    table
}

/// The forward transform of `values` followed by zeros up to `padded_length` (a power of two
/// at least `values.len()`), as [`fft`] of the padded record gives it.
///
/// After the bit-reversal permutation the nonzero values of a record padded P-fold (P a
/// power of two, values only in the first padded_length / P places) stand at the first place
/// of blocks of P, the rest of each block zero, and the first log2 P stages of butterflies
/// only copy each value across its block (e + 0 w = e - 0 w = e exactly). Those stages are
/// replaced by the copy itself: the same numbers (up to the sign of zeros) for less work, the
/// pruning of Markel (IEEE Trans. Audio Electroacoust. 19, 305, 1971).
fn fft_zero_padded(values: &[Complex], padded_length: usize) -> Vec<Complex> {
    assert!(padded_length.is_power_of_two() && values.len() <= padded_length);
    let occupied = values.len().max(1).next_power_of_two();
    let block = padded_length / occupied;
    if block < 2 {
        let mut data = vec![Complex::ZERO; padded_length];
        data[..values.len()].copy_from_slice(values);
        fft(&mut data);
        return data;
    }
    let bits = occupied.trailing_zeros();
    let mut data = Vec::with_capacity(padded_length);
    // Position p * block holds value rev(p) (bit reversal over log2 occupied bits), copied
    // across its block.
    for p in 0..occupied {
        let source = if bits == 0 {
            0
        } else {
            p.reverse_bits() >> (usize::BITS - bits)
        };
        let value = values.get(source).copied().unwrap_or(Complex::ZERO);
        data.extend(std::iter::repeat_n(value, block));
    }
    butterflies(&mut data, false, 2 * block);
    data
}

/// Bluestein's chirp-z transform for any length, through radix-2 convolution.
fn bluestein(data: &mut [Complex], inverse: bool) {
    let n = data.len();
    let m = (2 * n - 1).next_power_of_two();
    let sign = if inverse { 1.0 } else { -1.0 };
    // chirp_k = exp(sign i pi k^2 / N), with k^2 reduced mod 2N so the angle stays small.
    let modulus = 2 * n as u128;
    let chirp: Vec<Complex> = (0..n)
        .map(|k| {
            let reduced = (k as u128 * k as u128) % modulus;
            Complex::from_polar(1.0, sign * PI * reduced as f64 / n as f64)
        })
        .collect();
    let mut a = vec![Complex::ZERO; m];
    for k in 0..n {
        a[k] = data[k] * chirp[k];
    }
    let mut b = vec![Complex::ZERO; m];
    b[0] = chirp[0].conj();
    for k in 1..n {
        b[k] = chirp[k].conj();
        b[m - k] = chirp[k].conj();
    }
    radix2(&mut a, false);
    radix2(&mut b, false);
    for (x, y) in a.iter_mut().zip(&b) {
        *x = *x * *y;
    }
    radix2(&mut a, true);
    let factor = 1.0 / m as f64;
    for k in 0..n {
        data[k] = (a[k] * chirp[k]).scale(factor);
    }
}

/// A spectral window (see the module documentation).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum Window {
    /// w = 1: the best resolution, the worst leakage.
    Rectangular,
    /// w = 0.5 (1 - cos 2 pi t), t = j / (N - 1).
    #[default]
    Hann,
    /// w = 0.42 - 0.5 cos 2 pi t + 0.08 cos 4 pi t (Blackman's rounded coefficients).
    Blackman,
}

impl Window {
    /// The name used in parameters: "rectangular", "hann" or "blackman".
    pub fn name(self) -> &'static str {
        match self {
            Window::Rectangular => "rectangular",
            Window::Hann => "hann",
            Window::Blackman => "blackman",
        }
    }

    /// The window of that name (as [`Window::name`] gives it), if any.
    pub fn from_name(name: &str) -> Option<Self> {
        match name {
            "rectangular" => Some(Window::Rectangular),
            "hann" => Some(Window::Hann),
            "blackman" => Some(Window::Blackman),
            _ => None,
        }
    }

    /// The weight at t in [0, 1] (t = j / (N - 1) for sample j of N).
    pub fn weight(self, t: f64) -> f64 {
        match self {
            Window::Rectangular => 1.0,
            Window::Hann => 0.5 * (1.0 - (2.0 * PI * t).cos()),
            Window::Blackman => {
                // Clamped: the rounded coefficients give -1.4e-17 at the ends.
                (0.42 - 0.5 * (2.0 * PI * t).cos() + 0.08 * (4.0 * PI * t).cos()).max(0.0)
            }
        }
    }

    /// The N symmetric weights w_0 ... w_{N-1}; a single sample gets weight 1.
    pub fn coefficients(self, n: usize) -> Vec<f64> {
        if n == 1 {
            return vec![1.0];
        }
        (0..n).map(|j| self.weight(j as f64 / (n - 1) as f64)).collect()
    }
}

/// The one-sided amplitude spectrum of a real record (see the module documentation).
#[derive(Debug, Clone, PartialEq)]
pub struct AmplitudeSpectrum {
    /// f_k = k / (M spacing), k = 0 .. M/2, in the inverse unit of the spacing.
    pub frequencies: Vec<f64>,
    /// 2 |X_k| / sum w: the amplitude of a sinusoid at f_k (|X_0| / sum w at k = 0).
    pub amplitudes: Vec<f64>,
    /// M, the transform length after zero padding (a power of two).
    pub padded_length: usize,
    /// The bin width 1 / (M spacing).
    pub bin_width: f64,
    /// 1 / (N spacing): the natural resolution of the record.
    pub resolution: f64,
}

/// The windowed, zero-padded amplitude spectrum of `samples` taken every `spacing`.
///
/// # Panics
/// When there are fewer than two samples, the spacing is not finite and positive, or the
/// padding factor is 0 (programming errors: the analyses validate their input first).
pub fn amplitude_spectrum(samples: &[f64], spacing: f64, window: Window, padding_factor: usize) -> AmplitudeSpectrum {
    let n = samples.len();
    assert!(n >= 2, "an amplitude spectrum needs at least two samples, not {n}");
    assert!(
        spacing.is_finite() && spacing > 0.0,
        "the sample spacing must be finite and positive, not {spacing}"
    );
    assert!(padding_factor >= 1, "the padding factor must be at least 1");
    let weights = window.coefficients(n);
    let weight_sum: f64 = weights.iter().sum();
    let padded_length = (n * padding_factor).next_power_of_two();
    let windowed: Vec<Complex> = samples
        .iter()
        .zip(&weights)
        .map(|(sample, weight)| Complex::new(sample * weight, 0.0))
        .collect();
    let data = fft_zero_padded(&windowed, padded_length);
    let bin_width = 1.0 / (padded_length as f64 * spacing);
    let bins = padded_length / 2 + 1;
    let frequencies = (0..bins).map(|k| k as f64 * bin_width).collect();
    let amplitudes = (0..bins)
        .map(|k| {
            let factor = if k == 0 { 1.0 } else { 2.0 };
            factor * data[k].abs() / weight_sum
        })
        .collect();
    AmplitudeSpectrum {
        frequencies,
        amplitudes,
        padded_length,
        bin_width,
        resolution: 1.0 / (n as f64 * spacing),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::noise::Rng;

    /// The defining sum, O(N^2), as the reference.
    fn direct_dft(input: &[Complex], inverse: bool) -> Vec<Complex> {
        let n = input.len();
        let sign = if inverse { 1.0 } else { -1.0 };
        (0..n)
            .map(|k| {
                let mut sum = Complex::ZERO;
                for (j, value) in input.iter().enumerate() {
                    let angle = sign * 2.0 * PI * ((j * k) % n) as f64 / n as f64;
                    sum += *value * Complex::from_polar(1.0, angle);
                }
                sum
            })
            .collect()
    }

    fn random_signal(n: usize, seed: u64) -> Vec<Complex> {
        let mut rng = Rng::seeded(seed);
        (0..n)
            .map(|_| Complex::new(rng.standard_normal(), rng.standard_normal()))
            .collect()
    }

    fn max_difference(a: &[Complex], b: &[Complex]) -> f64 {
        a.iter().zip(b).map(|(x, y)| (*x - *y).abs()).fold(0.0, f64::max)
    }

    // The definition of the DFT (the sum itself) is the reference: radix-2 and Bluestein
    // lengths, primes included, agree with it to rounding.
    #[test]
    fn fft_matches_the_direct_sum_for_every_length() {
        for (seed, n) in [1usize, 2, 3, 4, 5, 8, 12, 17, 31, 64, 100, 127, 256, 1000]
            .into_iter()
            .enumerate()
        {
            let input = random_signal(n, seed as u64 + 11);
            let mut output = input.clone();
            fft(&mut output);
            let reference = direct_dft(&input, false);
            let scale = (n as f64).sqrt();
            assert!(
                max_difference(&output, &reference) < 1e-12 * scale * n as f64,
                "N = {n}"
            );
            let mut back = output.clone();
            inverse_fft(&mut back);
            assert!(max_difference(&back, &input) < 1e-13 * (n as f64).max(1.0), "N = {n}");
        }
    }

    /// Radix-2 with a table of its own length built for the call (the textbook form).
    fn radix2_fresh_table(data: &mut [Complex]) {
        let n = data.len();
        let bits = n.trailing_zeros();
        for i in 0..n {
            let j = i.reverse_bits() >> (usize::BITS - bits);
            if j > i {
                data.swap(i, j);
            }
        }
        let twiddles: Vec<Complex> = (0..n / 2)
            .map(|j| Complex::from_polar(1.0, -2.0 * PI * j as f64 / n as f64))
            .collect();
        let mut length = 2;
        while length <= n {
            let half = length / 2;
            let stride = n / length;
            for start in (0..n).step_by(length) {
                for j in 0..half {
                    let twiddled = data[start + j + half] * twiddles[j * stride];
                    let even = data[start + j];
                    data[start + j] = even + twiddled;
                    data[start + j + half] = even - twiddled;
                }
            }
            length *= 2;
        }
    }

    /// Equal numbers, a zero of either sign equal to the other.
    fn same_bits(a: &[Complex], b: &[Complex]) -> bool {
        a.len() == b.len() && a.iter().zip(b).all(|(x, y)| x.re == y.re && x.im == y.im)
    }

    // The shared twiddle table (read with a stride by shorter transforms) and the pruned
    // first stages of a zero-padded record give the very numbers of the textbook radix-2
    // with its own table, for every padding and record length.
    #[test]
    fn fft_shared_table_and_pruned_padding_change_no_bit() {
        // A long transform first, so that the shorter ones read its table with a stride.
        let mut long = random_signal(4096, 5);
        fft(&mut long);
        for (seed, (n, padded)) in [
            (1usize, 2usize),
            (1, 16),
            (3, 4),
            (5, 8),
            (100, 128),
            (100, 1024),
            (700, 8192),
            (1000, 1024),
        ]
        .into_iter()
        .enumerate()
        {
            let values = random_signal(n, seed as u64 + 40);
            let mut reference = vec![Complex::ZERO; padded];
            reference[..n].copy_from_slice(&values);
            radix2_fresh_table(&mut reference);
            let mut plain = vec![Complex::ZERO; padded];
            plain[..n].copy_from_slice(&values);
            fft(&mut plain);
            assert!(same_bits(&plain, &reference), "N = {padded}");
            assert!(
                same_bits(&fft_zero_padded(&values, padded), &reference),
                "{n} of {padded}"
            );
        }
    }

    // Parseval's theorem sum |x|^2 = (1/N) sum |X|^2 and the transform of a pure tone
    // (a single nonzero bin of height N) are properties of the DFT itself.
    #[test]
    fn fft_parseval_and_pure_tone() {
        for n in [48usize, 1024] {
            let input = random_signal(n, 3);
            let mut output = input.clone();
            fft(&mut output);
            let energy: f64 = input.iter().map(|z| z.abs().powi(2)).sum();
            let spectral: f64 = output.iter().map(|z| z.abs().powi(2)).sum::<f64>() / n as f64;
            assert!((energy - spectral).abs() < 1e-12 * energy, "N = {n}");
            let bin = 5;
            let mut tone: Vec<Complex> = (0..n)
                .map(|j| Complex::from_polar(1.0, 2.0 * PI * (bin * j) as f64 / n as f64))
                .collect();
            fft(&mut tone);
            for (k, value) in tone.iter().enumerate() {
                let expected = if k == bin { n as f64 } else { 0.0 };
                assert!((value.abs() - expected).abs() < 1e-10, "N = {n}, bin {k}: {value:?}");
            }
        }
    }

    // Harris (Proc. IEEE 66, 51, 1978): Hann is 0 at the ends and 1 in the middle, Blackman
    // 0 at the ends and 1 in the middle, both symmetric, with coherent gains (mean weight)
    // tending to 0.5 and 0.42.
    #[test]
    fn fft_windows_have_their_defining_values() {
        let n = 1001;
        for window in [Window::Hann, Window::Blackman] {
            let w = window.coefficients(n);
            assert!(w[0].abs() < 1e-16 && w[n - 1].abs() < 1e-16, "{window:?}");
            assert!((w[n / 2] - 1.0).abs() < 1e-15, "{window:?}");
            for j in 0..n {
                assert!((w[j] - w[n - 1 - j]).abs() < 1e-15);
                assert!(w[j] >= 0.0);
            }
        }
        let gain = |window: Window| window.coefficients(n).iter().sum::<f64>() / n as f64;
        // Symmetric windows of N points: sum = (N - 1) x gain, so the mean is off by O(1/N).
        assert!((gain(Window::Hann) - 0.5).abs() < 1e-3);
        assert!((gain(Window::Blackman) - 0.42).abs() < 1e-3);
        assert_eq!(gain(Window::Rectangular), 1.0);
        assert_eq!(Window::coefficients(Window::Hann, 1), vec![1.0]);
        for window in [Window::Rectangular, Window::Hann, Window::Blackman] {
            assert_eq!(Window::from_name(window.name()), Some(window));
        }
        assert_eq!(Window::from_name("hamming"), None);
    }

    // A sinusoid of amplitude 3 on a bin of the padded transform reads amplitude 3 (to the
    // leakage of its mirror image, small for many periods in the record) with each window,
    // and its frequency is the bin's.
    #[test]
    fn fft_amplitude_spectrum_reads_the_amplitude_of_a_sinusoid() {
        let n = 512;
        let spacing = 0.01;
        for window in [Window::Rectangular, Window::Hann, Window::Blackman] {
            let spectrum_probe = amplitude_spectrum(&vec![0.0; n], spacing, window, 4);
            assert_eq!(spectrum_probe.padded_length, 2048);
            let bin = 400; // 400 bins of 1/(2048 x 0.01): about 19.5 in the inverse unit.
            let frequency = bin as f64 * spectrum_probe.bin_width;
            let samples: Vec<f64> = (0..n)
                .map(|j| 3.0 * (2.0 * PI * frequency * j as f64 * spacing + 0.7).cos())
                .collect();
            let spectrum = amplitude_spectrum(&samples, spacing, window, 4);
            let (peak, amplitude) =
                spectrum
                    .amplitudes
                    .iter()
                    .enumerate()
                    .fold((0, 0.0), |best, (k, a)| if *a > best.1 { (k, *a) } else { best });
            assert_eq!(peak, bin, "{window:?}");
            assert!((amplitude - 3.0).abs() < 0.01, "{window:?}: {amplitude}");
            assert!((spectrum.frequencies[peak] - frequency).abs() < 1e-12);
            assert!((spectrum.resolution - 1.0 / (n as f64 * spacing)).abs() < 1e-12);
        }
    }
}
