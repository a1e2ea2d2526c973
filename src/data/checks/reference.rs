//! The outlier rule as first written (commit af7c32f): every view and every fit recomputed
//! from scratch for each suspect. Test-only: the fast path in the parent module must flag
//! exactly the same points with exactly the same distances and bars.
//!
//! The code below is the original, unchanged but for the imports and `pub(super)`.

#![allow(dead_code)]

use super::{
    outlier_threshold, OutlierFlag, DECADES_RATIO, HALF_WINDOW, MAD_TO_SIGMA, MAX_OUTLIER_WARNINGS,
    MEAN_AD_TO_SIGMA, MIN_HALF, MIN_POINTS_FOR_OUTLIERS, RESOLUTION_STEPS, ROUNDING,
    SUSPECT_SIGMAS,
};

/// Median of a slice (reordered in place; NaN-free input). 0 for an empty slice.
fn median(v: &mut [f64]) -> f64 {
    let n = v.len();
    if n == 0 {
        return 0.0;
    }
    let mid = n / 2;
    let (_, m, _) = v.select_nth_unstable_by(mid, f64::total_cmp);
    let m = *m;
    if n % 2 == 1 {
        m
    } else {
        let lower = v[..mid].iter().copied().fold(f64::NEG_INFINITY, f64::max);
        0.5 * (lower + m)
    }
}

/// The bar `k(m) = 5 (1 + 2 · 1.17/√m)`, in robust standard deviations, for a noise scale
/// Robust scale of `v` about its own median: 1.4826 · MAD, or 1.2533 · mean absolute
/// deviation when the MAD is zero. Returns (scale, median).
fn robust_scale(v: &[f64]) -> (f64, f64) {
    let mut tmp = v.to_vec();
    let med = median(&mut tmp);
    for (t, x) in tmp.iter_mut().zip(v) {
        *t = (x - med).abs();
    }
    let mut s = MAD_TO_SIGMA * median(&mut tmp);
    if s <= 0.0 && !tmp.is_empty() {
        s = MEAN_AD_TO_SIGMA * tmp.iter().sum::<f64>() / tmp.len() as f64;
    }
    (s, med)
}

/// A linear prediction `Σ_j w_j z_j` of one point from others, with `Σ_j w_j²`.
#[derive(Debug, Clone, Copy)]
struct Prediction {
    value: f64,
    weight_sq: f64,
}

/// Least-squares polynomial of degree at most `degree` through the points `(u_j, z_j)`,
/// evaluated at `u = 0`. The degree is lowered when the abscissae do not determine it (too
/// few distinct values, or a near-singular normal matrix). `None` with no point.
fn predict_at_zero(u: &[f64], z: &[f64], degree: usize) -> Option<Prediction> {
    let n = u.len().min(z.len());
    if n == 0 {
        return None;
    }
    let span = u.iter().fold(0.0f64, |a, &v| a.max(v.abs()));
    let span = if span > 0.0 && span.is_finite() {
        span
    } else {
        1.0
    };
    let mut s = [0.0f64; 2 * HALF_WINDOW + 1];
    let s = &mut s[..n.min(2 * HALF_WINDOW + 1)];
    for (sj, &uj) in s.iter_mut().zip(u) {
        *sj = uj / span;
    }
    let mut sorted = [0.0f64; 2 * HALF_WINDOW + 1];
    let sorted = &mut sorted[..s.len()];
    sorted.copy_from_slice(s);
    sorted.sort_unstable_by(f64::total_cmp);
    let distinct = 1 + sorted.windows(2).filter(|w| w[1] - w[0] > 1e-9).count();
    let mut d = degree.min(distinct - 1).min(2);
    loop {
        if let Some(v) = solve_normal(s, d) {
            let mut value = 0.0;
            let mut weight_sq = 0.0;
            for (&sj, &zj) in s.iter().zip(z) {
                let w = v[0] + v[1] * sj + v[2] * sj * sj;
                value += w * zj;
                weight_sq += w * w;
            }
            return Some(Prediction { value, weight_sq });
        }
        if d == 0 {
            return None;
        }
        d -= 1;
    }
}

/// `G⁻¹ e₀` for the normal matrix `G_ab = Σ_j s_j^(a+b)`, a, b ≤ `d` ≤ 2, padded with zeros
/// to length 3; `None` when a pivot is negligible.
fn solve_normal(s: &[f64], d: usize) -> Option<[f64; 3]> {
    let m = d + 1;
    let mut power = [0.0f64; 5];
    for &sj in s {
        let mut p = 1.0;
        for pk in power.iter_mut().take(2 * m - 1) {
            *pk += p;
            p *= sj;
        }
    }
    let mut a = [[0.0f64; 4]; 3];
    for (r, row) in a.iter_mut().enumerate().take(m) {
        for (c, cell) in row.iter_mut().enumerate().take(m) {
            *cell = power[r + c];
        }
        row[3] = if r == 0 { 1.0 } else { 0.0 };
    }
    let tiny = 1e-10 * s.len() as f64;
    for col in 0..m {
        let pivot = (col..m).max_by(|&p, &q| a[p][col].abs().total_cmp(&a[q][col].abs()))?;
        if a[pivot][col].abs() <= tiny {
            return None;
        }
        a.swap(col, pivot);
        let pivot_row = a[col];
        for (r, row) in a.iter_mut().enumerate().take(m) {
            if r != col {
                let f = row[col] / pivot_row[col];
                for (cell, &p) in row.iter_mut().zip(&pivot_row).skip(col) {
                    *cell -= f * p;
                }
            }
        }
    }
    let mut v = [0.0f64; 3];
    for (r, vr) in v.iter_mut().enumerate().take(m) {
        *vr = a[r][3] / a[r][r];
    }
    Some(v)
}

/// The values' transform `z = T(y)` (module docs, step 2).
#[derive(Debug, Clone, Copy, PartialEq)]
enum ValueScale {
    Linear,
    Sqrt,
    Log,
}

impl ValueScale {
    fn apply(self, y: f64) -> f64 {
        match self {
            ValueScale::Linear => y,
            ValueScale::Sqrt => y.sqrt(),
            ValueScale::Log => y.ln(),
        }
    }

    fn invert(self, z: f64) -> f64 {
        match self {
            ValueScale::Linear => z,
            ValueScale::Sqrt => z * z,
            ValueScale::Log => z.exp(),
        }
    }
}

/// A series in one representation: values `z` against abscissae `a` (recorded `x` or point
/// number); only the points marked in `active` serve as neighbours.
struct View<'a> {
    z: &'a [f64],
    a: &'a [f64],
    active: &'a [bool],
}

/// The neighbours of one point in series order: indices and count.
struct Neighbours {
    index: [usize; 2 * HALF_WINDOW],
    len: usize,
    /// The point has no neighbour on one side (an end of the series).
    end: bool,
}

impl Neighbours {
    fn iter(&self) -> impl Iterator<Item = usize> + '_ {
        self.index.iter().take(self.len).copied()
    }
}

impl View<'_> {
    fn is_active(&self, j: usize) -> bool {
        self.active.get(j).copied().unwrap_or(false)
    }

    /// The `2 HALF_WINDOW` active points nearest to `i` in series order, `i` itself left out:
    /// `HALF_WINDOW` on each side, more from one side where the other runs out (step 1).
    fn neighbours(&self, i: usize) -> Neighbours {
        let w = 2 * HALF_WINDOW;
        let mut left = [0usize; 2 * HALF_WINDOW];
        let mut right = [0usize; 2 * HALF_WINDOW];
        let mut nl = 0;
        for j in (0..i).rev().filter(|&j| self.is_active(j)) {
            if nl == w {
                break;
            }
            left[nl] = j;
            nl += 1;
        }
        let mut nr = 0;
        for j in (i + 1..self.z.len()).filter(|&j| self.is_active(j)) {
            if nr == w {
                break;
            }
            right[nr] = j;
            nr += 1;
        }
        let take_left = nl.min(HALF_WINDOW.max(w.saturating_sub(nr)));
        let take_right = nr.min(w - take_left);
        let mut out = Neighbours {
            index: [0; 2 * HALF_WINDOW],
            len: 0,
            end: nl == 0 || nr == 0,
        };
        for &j in left[..take_left].iter().rev().chain(&right[..take_right]) {
            out.index[out.len] = j;
            out.len += 1;
        }
        out
    }

    /// Leave-one-out quadratic prediction of point `i` from its neighbours (step 1), without
    /// the neighbour `skip` if given.
    fn centred(&self, i: usize, nb: &Neighbours, skip: Option<usize>) -> Option<Prediction> {
        let ai = *self.a.get(i)?;
        let mut u = [0.0f64; 2 * HALF_WINDOW];
        let mut z = [0.0f64; 2 * HALF_WINDOW];
        let mut k = 0;
        for j in nb.iter().filter(|&j| Some(j) != skip) {
            if let (Some(&aj), Some(&zj)) = (self.a.get(j), self.z.get(j)) {
                u[k] = aj - ai;
                z[k] = zj;
                k += 1;
            }
        }
        predict_at_zero(&u[..k], &z[..k], 2)
    }

    /// The deviation from the reference that an unresolved bend or step can explain (step
    /// 5): the largest second difference of the neighbours' values (taken in series order,
    /// the point itself skipped); for an end point, whose reference is extrapolated, the
    /// whole change across the neighbours (largest less smallest value), times `√(Σ_j w_j²)`
    /// of the prediction when that exceeds 1. `weight_sq` is the prediction's `Σ_j w_j²`.
    fn allowance(&self, nb: &Neighbours, weight_sq: f64) -> f64 {
        if nb.end {
            let values = nb.iter().filter_map(|j| self.z.get(j).copied());
            let (min, max) = values.fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), v| {
                (a.min(v), b.max(v))
            });
            // Amplified as the extrapolation amplifies noise.
            let stretch = weight_sq.sqrt().max(1.0);
            return (max - min).max(0.0) * stretch;
        }
        // Neighbours at the same abscissa (repeated readings) count as one, their mean.
        let mut groups = [0.0f64; 2 * HALF_WINDOW];
        let mut count = 0;
        let (mut at, mut sum, mut members) = (f64::NAN, 0.0, 0.0);
        for j in nb.iter() {
            let (Some(&aj), Some(&zj)) = (self.a.get(j), self.z.get(j)) else {
                continue;
            };
            if aj != at && members > 0.0 {
                groups[count] = sum / members;
                count += 1;
                (sum, members) = (0.0, 0.0);
            }
            at = aj;
            sum += zj;
            members += 1.0;
        }
        if members > 0.0 {
            groups[count] = sum / members;
            count += 1;
        }
        groups[..count]
            .windows(3)
            .map(|w| (w[2] - 2.0 * w[1] + w[0]).abs())
            .fold(0.0, f64::max)
    }
}

/// The reading resolution: the coarsest power of ten of which every difference between two
/// values is a whole multiple (the last recorded digit, whatever the offset of the unit), or
/// 0 when there is none within twelve digits of the largest value.
fn resolution(y: &[f64]) -> f64 {
    let Some(&first) = y.first() else {
        return 0.0;
    };
    let top = y.iter().fold(0.0f64, |a, &v| a.max(v.abs()));
    let spread = y.iter().fold(0.0f64, |a, &v| a.max((v - first).abs()));
    if !(spread > 0.0 && top.is_finite()) {
        return 0.0;
    }
    let p_hi = spread.log10().floor() as i32;
    let p_lo = top.log10().floor() as i32 - 12;
    for p in (p_lo..=p_hi).rev() {
        let step = 10f64.powi(p);
        // Rounding error of the stored values, in steps.
        let tolerance = 1e-6f64.max(16.0 * f64::EPSILON * top / step);
        let on_grid = y.iter().all(|&v| {
            let r = (v - first) / step;
            (r - r.round()).abs() <= tolerance
        });
        if on_grid {
            return step;
        }
    }
    0.0
}

/// Robust scale of the residuals of the active points in the smaller and the larger half of
/// the values (by `y`), each with its count, and which half each point is in (`true` =
/// larger half).
fn half_scales(c: &[f64], y: &[f64], active: &[bool]) -> ([(f64, usize); 2], Vec<bool>) {
    let mut order: Vec<usize> = (0..c.len())
        .filter(|&i| c[i].is_finite() && active.get(i).copied().unwrap_or(false))
        .collect();
    order.sort_by(|&p, &q| y[p].total_cmp(&y[q]));
    let half = order.len() / 2;
    let mut upper = vec![false; c.len()];
    let border = order.get(half).map(|&i| y[i]);
    for (i, u) in upper.iter_mut().enumerate() {
        *u = border.is_some_and(|b| y[i] >= b);
    }
    let lower_c: Vec<f64> = order[..half].iter().map(|&i| c[i]).collect();
    let upper_c: Vec<f64> = order[half..].iter().map(|&i| c[i]).collect();
    (
        [
            (robust_scale(&lower_c).0, lower_c.len()),
            (robust_scale(&upper_c).0, upper_c.len()),
        ],
        upper,
    )
}

/// One representation of a series judged on its own: values `z` against one abscissa, with
/// the standardised residuals and the noise scales of module docs steps 1 and 3, from the
/// active points.
struct Judge<'a> {
    view: View<'a>,
    /// Neighbours of every point.
    neighbours: Vec<Neighbours>,
    /// Standardised deleted residuals `c_i` (NaN where no fit).
    c: Vec<f64>,
    /// Reference values `ẑ_i` (NaN where no fit).
    reference: Vec<f64>,
    /// `Σ_j w_ij²` of each reference.
    weight_sq: Vec<f64>,
    /// Largest `|z|` of the series.
    magnitude: f64,
    /// Series scale σ̂, its count m and the median of `c`.
    sigma: f64,
    count: usize,
    centre: f64,
    /// Scale and count of the smaller and the larger half of the values; which half each
    /// point is in.
    halves: [(f64, usize); 2],
    upper: Vec<bool>,
}

impl<'a> Judge<'a> {
    fn new(z: &'a [f64], a: &'a [f64], active: &'a [bool], y: &[f64]) -> Self {
        let view = View { z, a, active };
        let n = z.len();
        let neighbours: Vec<Neighbours> = (0..n).map(|i| view.neighbours(i)).collect();
        let mut c = vec![f64::NAN; n];
        let mut reference = vec![f64::NAN; n];
        let mut weight_sq = vec![f64::NAN; n];
        for (i, nb) in neighbours.iter().enumerate() {
            if let Some(p) = view.centred(i, nb, None) {
                c[i] = (z[i] - p.value) / (1.0 + p.weight_sq).sqrt();
                reference[i] = p.value;
                weight_sq[i] = p.weight_sq;
            }
        }
        let finite: Vec<f64> = (0..n)
            .filter(|&i| c[i].is_finite() && view.is_active(i))
            .map(|i| c[i])
            .collect();
        let (sigma, centre) = robust_scale(&finite);
        let (halves, upper) = half_scales(&c, y, active);
        Judge {
            view,
            neighbours,
            c,
            reference,
            weight_sq,
            magnitude: z.iter().fold(0.0f64, |m, v| m.max(v.abs())),
            sigma,
            count: finite.len(),
            centre,
            halves,
            upper,
        }
    }

    /// The standardised residual of point `i` that is smallest in size among the fits that
    /// leave out, besides the point, one of its neighbours: unlike `c_i` it is not driven by
    /// a single gross error next to the point. For ranking suspects only.
    fn resistant_residual(&self, i: usize) -> Option<f64> {
        let nb = self.neighbours.get(i)?;
        let zi = *self.view.z.get(i)?;
        nb.iter()
            .filter_map(|k| self.view.centred(i, nb, Some(k)))
            .map(|p| (zi - p.value) / (1.0 + p.weight_sq).sqrt())
            .min_by(|a, b| a.abs().total_cmp(&b.abs()))
    }

    /// How uneven the noise is between the smaller and the larger half of the values (≥ 1).
    fn unevenness(&self) -> f64 {
        let [(lo, _), (hi, _)] = self.halves;
        if lo > 0.0 && hi > 0.0 {
            lo.max(hi) / lo.min(hi)
        } else if lo == hi {
            1.0
        } else {
            f64::INFINITY
        }
    }

    /// Distance of point `i` from its reference in robust standard deviations, and the bar
    /// (steps 3 and 4): the larger of the series bar and the bar of the point's own half.
    fn distance(&self, i: usize) -> Option<(f64, f64)> {
        let ci = *self.c.get(i)?;
        if !(ci.is_finite() && self.sigma > 0.0) {
            return None;
        }
        let (s_half, m_half) = self.halves[usize::from(*self.upper.get(i)?)];
        let mut used = (self.sigma, outlier_threshold(self.count));
        let k_half = outlier_threshold(m_half);
        if m_half >= MIN_HALF && s_half * k_half > used.0 * used.1 {
            used = (s_half, k_half);
        }
        let (s_used, k_used) = used;
        Some(((ci - self.centre).abs() / s_used, k_used))
    }

    /// Is point `i` far from this reference (steps 3 to 6)? Its distance and bar, or `None`
    /// when it passes. `y` is in the file's scale, `invert` maps a reference value back to
    /// it, `q` is the reading resolution.
    fn far(&self, i: usize, y: &[f64], invert: impl Fn(f64) -> f64, q: f64) -> Option<(f64, f64)> {
        let (sigmas, bar) = self.distance(i)?;
        if sigmas <= bar {
            return None;
        }
        let zi = *self.view.z.get(i)?;
        let reference = *self.reference.get(i)?;
        // Rounding in the fit itself (a constant series gives residuals of 1e-14).
        if (zi - reference).abs() <= ROUNDING * self.magnitude {
            return None;
        }
        if (zi - reference).abs()
            <= self
                .view
                .allowance(self.neighbours.get(i)?, *self.weight_sq.get(i)?)
        {
            return None;
        }
        if (y.get(i)? - invert(reference)).abs() <= RESOLUTION_STEPS * q {
            return None;
        }
        Some((sigmas, bar))
    }
}

/// The series in the value scale chosen for the active points (step 2), with one judge per
/// abscissa.
struct Judged<'a> {
    scale: ValueScale,
    judges: Vec<Judge<'a>>,
}

impl Judged<'_> {
    /// Point `i` judged on every abscissa: `Some` (smallest distance, its bar) only when it is
    /// far on all of them.
    fn far(&self, i: usize, y: &[f64], q: f64) -> Option<(f64, f64)> {
        let mut worst: Option<(f64, f64)> = None;
        for j in &self.judges {
            let (sig, lim) = j.far(i, y, |r| self.scale.invert(r), q)?;
            if worst.is_none_or(|(w, _)| sig < w) {
                worst = Some((sig, lim));
            }
        }
        worst
    }

    /// The next suspect: the active point farthest from its neighbours, ranked by the
    /// resistant residuals in series-wide robust standard deviations (the smaller over the
    /// abscissae).
    fn suspect(&self, active: &[bool]) -> Option<usize> {
        let mut ratio = vec![f64::INFINITY; active.len()];
        for j in &self.judges {
            let r: Vec<Option<f64>> = (0..active.len())
                .map(|i| {
                    if active[i] {
                        j.resistant_residual(i)
                    } else {
                        None
                    }
                })
                .collect();
            let finite: Vec<f64> = r.iter().flatten().copied().collect();
            let (scale, centre) = robust_scale(&finite);
            for (ri, q) in ratio.iter_mut().zip(&r) {
                let v = match q {
                    Some(v) if scale > 0.0 => (v - centre).abs() / scale,
                    _ => 0.0,
                };
                *ri = ri.min(v);
            }
        }
        (0..active.len())
            .filter(|&i| active[i] && ratio[i].is_finite() && ratio[i] > SUSPECT_SIGMAS)
            .max_by(|&p, &q| ratio[p].total_cmp(&ratio[q]))
    }
}

/// Choose the value scale (step 2) for the active points and build the judges.
fn judge<'a>(
    transformed: &'a [(ValueScale, Vec<f64>)],
    abscissae: &'a [&'a [f64]],
    active: &'a [bool],
    y: &[f64],
) -> Option<Judged<'a>> {
    let mut best: Option<(f64, usize)> = None;
    if transformed.len() > 1 {
        for (k, (_, z)) in transformed.iter().enumerate() {
            let closest = abscissae
                .iter()
                .map(|a| Judge::new(z, a, active, y))
                .min_by(|p, q| p.sigma.total_cmp(&q.sigma));
            if let Some(j) = closest {
                let u = j.unevenness();
                if best.is_none_or(|(b, _)| u < b) {
                    best = Some((u, k));
                }
            }
        }
    }
    let (scale, z) = transformed.get(best.map_or(0, |(_, k)| k))?;
    Some(Judged {
        scale: *scale,
        judges: abscissae
            .iter()
            .map(|a| Judge::new(z, a, active, y))
            .collect(),
    })
}

/// The points of `y` that the rule in the module docs reports, in series order. `x` holds the
/// times or positions (non-decreasing; pass an empty slice to use the point number only).
pub(super) fn find_outliers(x: &[f64], y: &[f64]) -> Vec<OutlierFlag> {
    let n = y.len();
    if n < MIN_POINTS_FOR_OUTLIERS || y.iter().any(|v| !v.is_finite()) {
        return Vec::new();
    }
    let index: Vec<f64> = (0..n).map(|i| i as f64).collect();
    let usable_x = x.len() == n
        && x.iter().all(|v| v.is_finite())
        && x.windows(2).all(|w| w[1] >= w[0])
        && x[n - 1] > x[0];
    let abscissae: Vec<&[f64]> = if !usable_x {
        vec![&index]
    } else if x.windows(2).any(|w| w[1] == w[0]) {
        // Repeated readings at one time or depth: the point number means nothing.
        vec![x]
    } else {
        let mean_step = (x[n - 1] - x[0]) / (n - 1) as f64;
        let uniform = x
            .windows(2)
            .all(|w| ((w[1] - w[0]) - mean_step).abs() <= 1e-9 * mean_step);
        if uniform {
            vec![&index]
        } else {
            vec![&index, x]
        }
    };
    let mut scales = vec![ValueScale::Linear];
    let (lo, hi) = y
        .iter()
        .fold((f64::INFINITY, 0.0f64), |(a, b), &v| (a.min(v), b.max(v)));
    if lo > 0.0 && hi / lo > DECADES_RATIO {
        scales.push(ValueScale::Sqrt);
        scales.push(ValueScale::Log);
    }
    let transformed: Vec<(ValueScale, Vec<f64>)> = scales
        .iter()
        .map(|&s| (s, y.iter().map(|&v| s.apply(v)).collect()))
        .collect();
    let q = resolution(y);

    // Suspects are set aside one at a time, so that a gross error does not inflate the
    // residuals of its neighbours and the noise scale (step 7).
    let max_suspects = (n / 5).clamp(2, MAX_OUTLIER_WARNINGS);
    let mut active = vec![true; n];
    let mut suspects = Vec::new();
    while suspects.len() < max_suspects {
        let next = judge(&transformed, &abscissae, &active, y).and_then(|j| j.suspect(&active));
        let Some(i) = next else { break };
        active[i] = false;
        suspects.push(i);
    }
    // Suspects that are far from the other points with all suspects set aside are
    // confirmed; the rest go back. Every point is then judged with only the confirmed ones
    // set aside.
    let mut mask = vec![true; n];
    if let Some(j) = judge(&transformed, &abscissae, &active, y) {
        for &i in &suspects {
            mask[i] = j.far(i, y, q).is_none();
        }
    }
    let mut reported: Vec<OutlierFlag> = Vec::new();
    if let Some(j) = judge(&transformed, &abscissae, &mask, y) {
        for i in 0..n {
            if let Some((sigmas, limit)) = j.far(i, y, q) {
                reported.push(OutlierFlag {
                    index: i,
                    sigmas,
                    limit,
                });
            }
        }
    }
    reported.sort_by_key(|f| f.index);
    reported
}
