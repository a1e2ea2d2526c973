//! Thinning of long series for drawing only: a figure of a million markers is a file of
//! tens of megabytes that shows no more than a few thousand would. The data files of a
//! report (`fitted.csv`, `report.json`) keep every point; only the figures thin.
//!
//! * A series of markers with more than [`DRAW_ALL_UP_TO`] points keeps, in each of
//!   [`DRAW_BINS`] bins of equal width along the x axis, the point with the smallest and the
//!   one with the largest y ([`bin_extremes`]). The envelope of the cloud, every extreme
//!   and every isolated point (an outlier, a gap's edge) are drawn; only points hidden
//!   inside the cloud of their bin are left out. A plot 720 pixels wide has about two bins
//!   per pixel column.
//! * A normal Q–Q plot with more than [`DRAW_ALL_UP_TO`] residuals keeps [`QQ_SPACED`]
//!   order statistics evenly spaced in rank (so in plotting position, that is in
//!   probability) and the [`QQ_TAIL`] smallest and largest in full ([`qq_ranks`]), where a
//!   heavy tail shows.
//!
//! Points with a non-finite coordinate are always kept, so the renderer still counts them in
//! its notes. Every thinned figure says so in a note under it and in its caption
//! ([`thinned_note`]).
//!
//! References: the min/max-per-bin reduction is common practice for drawing long time
//! series (the envelope a pixel column would show); rank spacing for Q–Q plots follows the
//! plotting positions of the plot itself (Blom 1958, see [`super::qq_figure`]).

use super::Series;

/// A series with more points than this is thinned for drawing.
pub const DRAW_ALL_UP_TO: usize = 4000;

/// Bins along the x axis of a thinned series of markers.
pub const DRAW_BINS: usize = 1500;

/// Order statistics kept evenly spaced in rank in a thinned Q–Q plot.
pub const QQ_SPACED: usize = 3000;

/// Smallest and largest order statistics kept in full at each end of a thinned Q–Q plot.
pub const QQ_TAIL: usize = 200;

/// Indices (increasing) of the points of `(x, y)` drawn: all of them up to
/// [`DRAW_ALL_UP_TO`] points, else in each of `bins` bins of equal width over the finite
/// range of `x` the first point with the smallest and the first with the largest finite `y`,
/// and every point with a non-finite coordinate. `x` and `y` are paired up to the shorter.
pub fn bin_extremes(x: &[f64], y: &[f64], bins: usize) -> Vec<usize> {
    let n = x.len().min(y.len());
    if n <= DRAW_ALL_UP_TO {
        return (0..n).collect();
    }
    let finite = |i: usize| x[i].is_finite() && y[i].is_finite();
    let (lo, hi) = (0..n)
        .filter(|&i| finite(i))
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), i| {
            (a.min(x[i]), b.max(x[i]))
        });
    let bins = bins.max(1);
    let width = hi - lo;
    let bin_of = |v: f64| -> usize {
        if width > 0.0 && width.is_finite() {
            (((v - lo) / width * bins as f64) as usize).min(bins - 1)
        } else {
            0
        }
    };
    // Per bin: index of the smallest and of the largest y.
    let mut low: Vec<Option<usize>> = vec![None; bins];
    let mut high: Vec<Option<usize>> = vec![None; bins];
    let mut keep = vec![false; n];
    for i in 0..n {
        if !finite(i) {
            keep[i] = true;
            continue;
        }
        let b = bin_of(x[i]);
        if low[b].is_none_or(|j| y[i] < y[j]) {
            low[b] = Some(i);
        }
        if high[b].is_none_or(|j| y[i] > y[j]) {
            high[b] = Some(i);
        }
    }
    for i in low.into_iter().chain(high).flatten() {
        keep[i] = true;
    }
    (0..n).filter(|&i| keep[i]).collect()
}

/// The entries of `v` at `index` (increasing, within `v`).
fn pick(v: &[f64], index: &[usize]) -> Vec<f64> {
    index.iter().filter_map(|&i| v.get(i).copied()).collect()
}

/// A series of markers of the points `(x, y)` thinned for drawing ([`bin_extremes`] with
/// [`DRAW_BINS`] bins), and its number of points before, when it was thinned. Only the points
/// drawn are copied, so a long series costs no second copy of its data.
pub fn thinned_markers(label: impl Into<String>, x: &[f64], y: &[f64]) -> (Series, Option<usize>) {
    let n = x.len().min(y.len());
    let index = bin_extremes(x, y, DRAW_BINS);
    (
        Series::markers(label, pick(x, &index), pick(y, &index)),
        (n > DRAW_ALL_UP_TO).then_some(n),
    )
}

/// Ranks (from 0, increasing) of the order statistics drawn in a normal Q–Q plot of `n`
/// residuals: all up to [`DRAW_ALL_UP_TO`], else the [`QQ_TAIL`] smallest and largest and
/// [`QQ_SPACED`] evenly spaced in rank between.
pub fn qq_ranks(n: usize) -> Vec<usize> {
    if n <= DRAW_ALL_UP_TO {
        return (0..n).collect();
    }
    let mut ranks: Vec<usize> = (0..QQ_TAIL).chain(n - QQ_TAIL..n).collect();
    let step = (n - 1) as f64 / (QQ_SPACED - 1) as f64;
    ranks.extend((0..QQ_SPACED).map(|j| ((j as f64 * step).round() as usize).min(n - 1)));
    ranks.sort_unstable();
    ranks.dedup();
    ranks
}

/// A whole number with its digits in groups of three (`1 000 000`).
pub fn grouped(n: usize) -> String {
    let digits = n.to_string();
    let mut out = String::new();
    for (k, c) in digits.chars().enumerate() {
        if k > 0 && (digits.len() - k).is_multiple_of(3) {
            out.push(' ');
        }
        out.push(c);
    }
    out
}

/// The note under a thinned figure: `"2 000 of 1 000 000 points shown: …"`; `how` says
/// which points (`"bin extremes"`).
pub fn thinned_note(shown: usize, total: usize, how: &str) -> String {
    format!(
        "{} of {} points shown: {how}",
        grouped(shown),
        grouped(total)
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn short_series_are_kept_whole() {
        let x: Vec<f64> = (0..DRAW_ALL_UP_TO).map(|i| i as f64).collect();
        assert_eq!(bin_extremes(&x, &x, 10).len(), DRAW_ALL_UP_TO);
        assert_eq!(qq_ranks(5), vec![0, 1, 2, 3, 4]);
    }

    #[test]
    fn every_bin_keeps_its_extremes_and_non_finite_points_stay() {
        let n = 100_000;
        let x: Vec<f64> = (0..n).map(|i| i as f64).collect();
        let mut y: Vec<f64> = (0..n).map(|i| ((i * 7919) % 1000) as f64).collect();
        y[12_345] = 5000.0;
        y[54_321] = -5000.0;
        y[777] = f64::NAN;
        let kept = bin_extremes(&x, &y, 100);
        assert!(kept.contains(&12_345) && kept.contains(&54_321) && kept.contains(&777));
        assert!(kept.len() <= 2 * 100 + 1, "{}", kept.len());
        assert!(kept.windows(2).all(|w| w[0] < w[1]));
        // In every bin of 1000 points the largest and smallest y are among the kept ones.
        for b in 0..100 {
            let range = b * 1000..(b + 1) * 1000;
            let finite = || range.clone().filter(|&i| y[i].is_finite());
            let max = finite().map(|i| y[i]).fold(f64::NEG_INFINITY, f64::max);
            let min = finite().map(|i| y[i]).fold(f64::INFINITY, f64::min);
            assert!(
                kept.iter().any(|&i| range.contains(&i) && y[i] == max),
                "bin {b}"
            );
            assert!(
                kept.iter().any(|&i| range.contains(&i) && y[i] == min),
                "bin {b}"
            );
        }
    }

    /// The thinned series holds exactly the points [`bin_extremes`] picks, in order, and a
    /// short series whole.
    #[test]
    fn thinned_markers_hold_the_points_bin_extremes_picks() {
        let n = 50_000;
        let x: Vec<f64> = (0..n).map(|i| i as f64 * 0.5).collect();
        let y: Vec<f64> = (0..n).map(|i| ((i * 7919) % 997) as f64).collect();
        let (series, count) = thinned_markers("s", &x, &y);
        let index = bin_extremes(&x, &y, DRAW_BINS);
        assert_eq!(count, Some(n));
        assert!(index.len() < n);
        assert_eq!(series.x, index.iter().map(|&i| x[i]).collect::<Vec<_>>());
        assert_eq!(series.y, index.iter().map(|&i| y[i]).collect::<Vec<_>>());
        let (short, none) = thinned_markers("s", &x[..10], &y[..10]);
        assert_eq!(none, None);
        assert_eq!(short.y, y[..10].to_vec());
    }

    #[test]
    fn qq_ranks_keep_both_tails_and_a_spread() {
        let n = 1_000_000;
        let r = qq_ranks(n);
        assert!(r.len() <= QQ_SPACED + 2 * QQ_TAIL);
        assert!((0..QQ_TAIL).all(|k| r.contains(&k) && r.contains(&(n - 1 - k))));
        assert!(r.windows(2).all(|w| w[0] < w[1]));
        // Evenly spaced in between: no gap wider than one spacing step (rounded up).
        let step = (n - 1) / (QQ_SPACED - 1) + 1;
        assert!(r.windows(2).all(|w| w[1] - w[0] <= step));
    }

    #[test]
    fn numbers_are_grouped_by_thousands() {
        assert_eq!(grouped(7), "7");
        assert_eq!(grouped(2000), "2 000");
        assert_eq!(grouped(1_000_000), "1 000 000");
        assert_eq!(
            thinned_note(2000, 1_000_000, "bin extremes"),
            "2 000 of 1 000 000 points shown: bin extremes"
        );
    }
}
