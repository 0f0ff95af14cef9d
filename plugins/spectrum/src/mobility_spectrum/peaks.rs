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
        for (i, &value) in spectrum.iter().enumerate().take(high.0 + 1).skip(low.0) {
            let share = if i == low.0 && index > 0 {
                low.1
            } else if i == high.0 && index + 1 < tops.len() {
                high.1
            } else {
                1.0
            };
            if value > 0.0 {
                members.push((i, share));
            }
        }
        regions.push(Region { top, members });
    }
    regions
}

/// Region `index` of `regions` (in grid order) widened, with share 1, into the grid points
/// around it where `spectrum` is zero, up to the first nonzero point, the grid's edge, or
/// halfway to the neighbouring region (empty points between two regions are split between
/// them, so none counts twice). The chosen spectrum has no weight there, so its integrals do not change; a
/// bootstrap replica whose noise moves some of the peak's weight a step or two beyond the
/// chosen support (non-negative least squares puts exact zeros around each peak) still
/// has it counted, instead of losing it and looking like a large deviation.
pub(super) fn widened(spectrum: &[f64], regions: &[Region], index: usize) -> Region {
    let region = &regions[index];
    let mut members = region.members.clone();
    let (Some(&(first, _)), Some(&(last, _))) = (region.members.first(), region.members.last()) else {
        return region.clone();
    };
    // The lowest index the widening may take, and one past the highest.
    let low = match index.checked_sub(1).and_then(|i| regions[i].members.last()) {
        Some(&(previous_last, _)) => (previous_last + first) / 2 + 1,
        None => 0,
    };
    let high = match regions.get(index + 1).and_then(|r| r.members.first()) {
        Some(&(next_first, _)) => (last + next_first) / 2 + 1,
        None => spectrum.len(),
    };
    let mut i = first;
    while i > low && spectrum[i - 1] == 0.0 {
        i -= 1;
        members.insert(0, (i, 1.0));
    }
    let mut i = last;
    while i + 1 < high && spectrum[i + 1] == 0.0 {
        i += 1;
        members.push((i, 1.0));
    }
    Region {
        top: region.top,
        members,
    }
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
    fn widened_regions_take_the_empty_points_around_them_only() {
        //          0    1    2    3    4    5    6    7    8    9
        let s = [0.0, 0.0, 2.0, 5.0, 1.0, 0.0, 0.0, 4.0, 0.0, 0.3];
        let regions = find(&s, 1.0);
        assert_eq!(regions.len(), 2);
        // The empty points 5 and 6 lie between the regions (2..4 and 7): split halfway.
        let first = widened(&s, &regions, 0);
        assert_eq!(first.members.first(), Some(&(0, 1.0)));
        assert_eq!(first.members.last(), Some(&(5, 1.0)));
        let second = widened(&s, &regions, 1);
        assert_eq!(second.members.first(), Some(&(6, 1.0)));
        // 8 is empty and 9 holds weight of no region: the widening stops at 8.
        assert_eq!(second.members.last(), Some(&(8, 1.0)));
        let weight = |r: &Region| r.members.iter().map(|&(k, f)| f * s[k]).sum::<f64>();
        assert_eq!(weight(&first), weight(&regions[0]));
        assert_eq!(weight(&second), weight(&regions[1]));
    }

    #[test]
    fn parabola_finds_the_vertex_between_grid_points() {
        // y = -(x - 0.3)^2 sampled at x = -1, 0, 1 has its vertex 0.3 steps right of 0.
        let s: Vec<f64> = [-1.0f64, 0.0, 1.0].iter().map(|x| 10.0 - (x - 0.3).powi(2)).collect();
        assert!((parabolic_offset(&s, 1) - 0.3).abs() < 1e-12);
        assert_eq!(parabolic_offset(&s, 0), 0.0);
    }
}
