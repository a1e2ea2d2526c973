//! Quantiles and confidence intervals from the Student-t, χ² and F distributions.
//!
//! - Student-t interval: `θ̂ ± t(1 − α/2; ν) · SE`, `α = 1 − level`, `ν = n − p`.
//! - `F(1, ν; level) = t((1 + level)/2; ν)²` (an F variate with one numerator degree of
//!   freedom is the square of a t variate), used by the profile-likelihood threshold.
//! - χ² upper-tail probability for the goodness of fit when σ is absolute.
//!
//! Distributions from `statrs`. References: M. Abramowitz & I. A. Stegun, *Handbook of
//! Mathematical Functions* (1964), §26.6–26.7.

use statrs::distribution::{ChiSquared, ContinuousCDF, Normal, StudentsT};

use crate::error::{Error, Result};

fn check_level(level: f64) -> Result<()> {
    if level.is_finite() && level > 0.0 && level < 1.0 {
        Ok(())
    } else {
        Err(Error::setting(
            "confidence_level",
            format!("the confidence level must lie strictly between 0 and 1, found {level}"),
        ))
    }
}

fn check_dof(dof: f64) -> Result<()> {
    if dof.is_finite() && dof > 0.0 {
        Ok(())
    } else {
        Err(Error::Fit(format!(
            "needs more data points than free parameters (degrees of freedom {dof})"
        )))
    }
}

/// Quantile `t(prob; dof)` of the standard Student-t distribution, `0 < prob < 1`.
pub fn t_quantile(prob: f64, dof: f64) -> Result<f64> {
    check_level(prob)?;
    check_dof(dof)?;
    let t = StudentsT::new(0.0, 1.0, dof).map_err(|e| Error::Fit(format!("Student-t: {e}")))?;
    Ok(t.inverse_cdf(prob))
}

/// Two-sided critical value `t(1 − α/2; dof)` for a confidence `level = 1 − α`.
pub fn t_critical(level: f64, dof: f64) -> Result<f64> {
    check_level(level)?;
    t_quantile(0.5 * (1.0 + level), dof)
}

/// `F(1, dof; level)`, the `level` quantile of the F distribution with (1, dof) degrees of
/// freedom, as `t((1 + level)/2; dof)²`.
pub fn f1_quantile(level: f64, dof: f64) -> Result<f64> {
    Ok(t_critical(level, dof)?.powi(2))
}

/// Quantile of the χ² distribution with `dof` degrees of freedom.
pub fn chi2_quantile(prob: f64, dof: f64) -> Result<f64> {
    check_level(prob)?;
    check_dof(dof)?;
    let c = ChiSquared::new(dof).map_err(|e| Error::Fit(format!("chi-squared: {e}")))?;
    Ok(c.inverse_cdf(prob))
}

/// Upper-tail probability `P(X ≥ x)` of the χ² distribution with `dof` degrees of freedom.
pub fn chi2_sf(x: f64, dof: f64) -> Result<f64> {
    check_dof(dof)?;
    let c = ChiSquared::new(dof).map_err(|e| Error::Fit(format!("chi-squared: {e}")))?;
    Ok(c.sf(x))
}

/// Two-sided p-value `2 (1 − Φ(|z|))` of a standard normal statistic.
pub fn normal_two_sided_p(z: f64) -> f64 {
    match Normal::new(0.0, 1.0) {
        Ok(n) => 2.0 * n.sf(z.abs()),
        Err(_) => f64::NAN,
    }
}

/// Two-sided standard-normal critical value `z(1 − α/2)` for `level = 1 − α`.
pub fn normal_critical(level: f64) -> Result<f64> {
    check_level(level)?;
    let n = Normal::new(0.0, 1.0).map_err(|e| Error::Fit(format!("normal: {e}")))?;
    Ok(n.inverse_cdf(0.5 * (1.0 + level)))
}

/// A two-sided interval.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct Interval {
    /// Lower end (SI).
    pub lower: f64,
    /// Upper end (SI).
    pub upper: f64,
}

/// Student-t interval `estimate ± t(1 − α/2; dof) · se`.
pub fn student_t_interval(estimate: f64, se: f64, level: f64, dof: f64) -> Result<Interval> {
    let t = t_critical(level, dof)?;
    Ok(Interval {
        lower: estimate - t * se,
        upper: estimate + t * se,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn f1_is_t_squared_and_levels_checked() {
        // F(1, 10; 0.95) = 4.9646 (standard F tables, e.g. NIST/SEMATECH e-Handbook 1.3.6.7.3)
        let f = f1_quantile(0.95, 10.0).unwrap();
        assert!((f - 4.9646).abs() < 1e-3, "{f}");
        assert!(t_critical(1.5, 10.0).is_err());
        assert!(t_critical(0.95, 0.0).is_err());
        // chi2(1; 0.95) = 3.841 (standard tables)
        assert!((chi2_quantile(0.95, 1.0).unwrap() - 3.8415).abs() < 1e-3);
    }
}
