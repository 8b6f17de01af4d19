//! Kidney function: the CKD-EPI 2021 race-free creatinine equation (Inker et al., NEJM
//! 2021;385:1737–1749, as given in the project's domain reference §2.4) and its inverse, used to
//! give each patient a serum creatinine that yields the eGFR drawn for them.

/// Only the tests need the forward equation; the generator uses its inverse.
#[cfg(test)]
/// eGFR in mL/min/1.73 m² from serum creatinine in mg/dL (IDMS-traceable), age in years and sex.
pub fn egfr_ckd_epi_2021(creatinine_mg_dl: f64, age_years: f64, female: bool) -> f64 {
    let (kappa, alpha, sex_factor) = constants(female);
    let ratio = creatinine_mg_dl / kappa;
    142.0
        * ratio.min(1.0).powf(alpha)
        * ratio.max(1.0).powf(-1.200)
        * 0.9938f64.powf(age_years)
        * sex_factor
}

/// The serum creatinine (mg/dL) at which the CKD-EPI 2021 equation gives `egfr`.
pub fn creatinine_for_egfr(egfr: f64, age_years: f64, female: bool) -> f64 {
    let (kappa, alpha, sex_factor) = constants(female);
    let at_kappa = 142.0 * 0.9938f64.powf(age_years) * sex_factor;
    let r = egfr / at_kappa;
    if r >= 1.0 {
        kappa * r.powf(1.0 / alpha)
    } else {
        kappa * r.powf(-1.0 / 1.200)
    }
}

/// (κ, α, sex factor) of the equation.
fn constants(female: bool) -> (f64, f64, f64) {
    if female {
        (0.7, -0.241, 1.012)
    } else {
        (0.9, -0.302, 1.0)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Worked values of the domain reference §2.4 (computed there in Python from the published
    /// equation; one public calculator page gives ≈ 76 for the first case).
    #[test]
    fn worked_values() {
        let cases = [
            (false, 55.0, 0.9, 75.5, "G2"),
            (true, 50.0, 1.0, 91.7, "G1"),
            (false, 40.0, 0.6, 116.3, "G1"),
            (true, 60.0, 1.2, 69.2, "G2"),
            (false, 72.0, 1.5, 36.8, "G3b"),
            (true, 70.0, 2.5, 27.0, "G4"),
            (true, 80.0, 4.0, 14.4, "G5"),
        ];
        for (male, age, scr, expected, category) in cases {
            let female = !male;
            let e = egfr_ckd_epi_2021(scr, age, female);
            assert!((e - expected).abs() < 0.05, "{male} {age} {scr}: {e}");
            assert_eq!(
                kcohort_model::kidney::kdigo_gfr_category(e).unwrap(),
                category
            );
        }
    }

    #[test]
    fn inverse_round_trips_on_both_branches() {
        for female in [true, false] {
            for age in [18.0, 45.0, 70.0, 95.0] {
                for egfr in [8.0, 20.0, 44.9, 45.1, 75.0, 110.0, 130.0] {
                    let scr = creatinine_for_egfr(egfr, age, female);
                    let back = egfr_ckd_epi_2021(scr, age, female);
                    assert!(
                        (back - egfr).abs() < 1e-9,
                        "{female} {age} {egfr}: {scr} -> {back}"
                    );
                }
            }
        }
    }
}
