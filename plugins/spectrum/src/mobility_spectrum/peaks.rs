//! Peaks of one carrier sign's spectrum: where they are and which grid points belong to
//! each.
//!
//! A peak is a local maximum of the spectrum (conductance per unit ln|mu|) at or above the
//! threshold. Its region runs down both flanks: between two accepted peaks it ends at the
//! lowest point between them (that point's weight is shared half and half, so nothing is
//! counted twice); on an outer flank it ends where the spectrum stops falling (a minimum,
//! a zero, or the grid edge). Smaller bumps between two accepted peaks fall into the region
//! of the peak on their side of the lowest point, so the regions together hold all of the
//! conductance between the outermost minima.

/// The grid points of one peak and the share of each point's weight that belongs to it.
#[derive(Debug, Clone, PartialEq)]
pub(super) struct Region {
    /// Index of the maximum.
    pub top: usize,
    /// (grid index, share in (0, 1]).
    pub members: Vec<(usize, f64)>,
}

/// The peaks of `spectrum` (one carrier sign, ascending mobility) at or above `threshold`.
pub(super) fn find(spectrum: &[f64], threshold: f64) -> Vec<Region> {
    let n = spectrum.len();
    let mut tops = Vec::new();
    let mut k = 0;
    while k < n {
        // A plateau of equal values counts once, at its first point.
        let mut end = k;
        while end + 1 < n && spectrum[end + 1] == spectrum[k] {
            end += 1;
        }
        let rises_into = k == 0 || spectrum[k - 1] < spectrum[k];
        let falls_after = end + 1 == n || spectrum[end + 1] < spectrum[k];
        if rises_into && falls_after && spectrum[k] > 0.0 && spectrum[k] >= threshold {
            tops.push(k);
        }
        k = end + 1;
    }
    let mut regions = Vec::with_capacity(tops.len());
    for (index, &top) in tops.iter().enumerate() {
        let mut members: Vec<(usize, f64)> = Vec::new();
        // Left flank.
        let low = match index {
            0 => {
                let mut i = top;
                while i > 0 && spectrum[i - 1] <= spectrum[i] && spectrum[i] > 0.0 {
                    i -= 1;
                }
                (i, 1.0)
            }
            _ => lowest_between(spectrum, tops[index - 1], top),
        };
        let high = match tops.get(index + 1) {
            None => {
                let mut i = top;
                while i + 1 < n && spectrum[i + 1] <= spectrum[i] && spectrum[i] > 0.0 {
                    i += 1;
                }
                (i, 1.0)
            }
            Some(&next) => lowest_between(spectrum, top, next),
        };
        for i in low.0..=high.0 {
            let share = if i == low.0 && index > 0 {
                low.1
            } else if i == high.0 && index + 1 < tops.len() {
                high.1
            } else {
                1.0
            };
            if spectrum[i] > 0.0 {
                members.push((i, share));
            }
        }
        regions.push(Region { top, members });
    }
    regions
}

/// The lowest point strictly between two tops (the first, when several are equally low),
/// with the share 1/2 that each neighbouring peak takes of it.
fn lowest_between(spectrum: &[f64], left: usize, right: usize) -> (usize, f64) {
    let lowest = (left + 1..right)
        .min_by(|&a, &b| spectrum[a].total_cmp(&spectrum[b]))
        .unwrap_or(left + 1);
    (lowest, 0.5)
}

/// The position of the maximum refined by a parabola through the top and its neighbours,
/// in grid steps from the top (within +-1/2), 0 at an edge.
pub(super) fn parabolic_offset(spectrum: &[f64], top: usize) -> f64 {
    if top == 0 || top + 1 >= spectrum.len() {
        return 0.0;
    }
    let (a, b, c) = (spectrum[top - 1], spectrum[top], spectrum[top + 1]);
    let curvature = a - 2.0 * b + c;
    if curvature >= 0.0 {
        return 0.0;
    }
    (0.5 * (a - c) / curvature).clamp(-0.5, 0.5)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn peaks_split_at_the_minimum_and_share_it() {
        //          0    1    2    3    4    5    6    7    8
        let s = [0.0, 1.0, 4.0, 2.0, 1.0, 3.0, 5.0, 1.0, 0.0];
        let regions = find(&s, 0.5);
        assert_eq!(regions.len(), 2);
        assert_eq!(regions[0].top, 2);
        assert_eq!(regions[0].members, vec![(1, 1.0), (2, 1.0), (3, 1.0), (4, 0.5)]);
        assert_eq!(regions[1].top, 6);
        assert_eq!(regions[1].members, vec![(4, 0.5), (5, 1.0), (6, 1.0), (7, 1.0)]);
        // Every unit of weight is counted exactly once.
        let counted: f64 = regions
            .iter()
            .flat_map(|r| r.members.iter().map(|(i, w)| s[*i] * w))
            .sum();
        assert_eq!(counted, s.iter().sum::<f64>());
    }

    #[test]
    fn peaks_below_the_threshold_are_absorbed_and_edges_count() {
        // A small bump at 3 between two accepted peaks; a peak at the right edge.
        let s = [2.0, 5.0, 1.0, 1.5, 0.5, 3.0, 6.0];
        let regions = find(&s, 2.0);
        assert_eq!(regions.iter().map(|r| r.top).collect::<Vec<_>>(), vec![1, 6]);
        assert_eq!(
            regions[0].members,
            vec![(0, 1.0), (1, 1.0), (2, 1.0), (3, 1.0), (4, 0.5)]
        );
        assert_eq!(regions[1].members, vec![(4, 0.5), (5, 1.0), (6, 1.0)]);
        // A plateau top counts once; a flat zero spectrum has no peak.
        assert_eq!(find(&[0.0, 2.0, 2.0, 0.0], 1.0).len(), 1);
        assert!(find(&[0.0; 5], 0.0).is_empty());
    }

    #[test]
    fn parabola_finds_the_vertex_between_grid_points() {
        // y = -(x - 0.3)^2 sampled at x = -1, 0, 1 has its vertex 0.3 steps right of 0.
        let s: Vec<f64> = [-1.0f64, 0.0, 1.0].iter().map(|x| 10.0 - (x - 0.3).powi(2)).collect();
        assert!((parabolic_offset(&s, 1) - 0.3).abs() < 1e-12);
        assert_eq!(parabolic_offset(&s, 0), 0.0);
    }
}
