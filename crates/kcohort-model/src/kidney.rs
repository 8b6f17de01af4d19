//! Kidney function from creatinine: the CKD-EPI 2021 eGFR equation and the KDIGO 2012 GFR
//! categories and AKI stages. Pure functions; the engine calls them from SQL through UDFs
//! (`crates/kcohort-engine/src/kidney_udf.rs`).

/// Sex as the equation uses it.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Sex {
    Female,
    Male,
}

impl Sex {
    /// The input contract's codes: `F`, `M`; `U` (unknown) has no equation.
    pub fn from_code(code: &str) -> Option<Sex> {
        match code {
            "F" => Some(Sex::Female),
            "M" => Some(Sex::Male),
            _ => None,
        }
    }
}

/// Youngest age the equation is defined for (adults).
pub const ADULT_AGE: f64 = 18.0;

/// eGFR (mL/min/1.73 m²) by the race-free CKD-EPI 2021 creatinine equation (Inker et al.,
/// N Engl J Med 2021;385:1737–1749; the National Kidney Foundation's published form):
///
/// eGFR = 142 × min(Scr/κ, 1)^α × max(Scr/κ, 1)^−1.200 × 0.9938^age × 1.012 [if female],
/// κ = 0.7 (female) or 0.9 (male), α = −0.241 (female) or −0.302 (male), Scr in mg/dL.
///
/// `None` for a child (age below 18), or a creatinine that is not a positive finite number.
pub fn ckd_epi_2021(creatinine_mg_dl: f64, age_years: f64, sex: Sex) -> Option<f64> {
    let usable = creatinine_mg_dl.is_finite() && creatinine_mg_dl > 0.0 && age_years.is_finite();
    if !usable || age_years < ADULT_AGE {
        return None;
    }
    let (kappa, alpha, factor) = match sex {
        Sex::Female => (0.7, -0.241, 1.012),
        Sex::Male => (0.9, -0.302, 1.0),
    };
    let r = creatinine_mg_dl / kappa;
    Some(
        142.0
            * r.min(1.0).powf(alpha)
            * r.max(1.0).powf(-1.200)
            * 0.9938f64.powf(age_years)
            * factor,
    )
}

/// KDIGO 2012 GFR category of an eGFR (mL/min/1.73 m²): G1 ≥ 90, G2 60–89, G3a 45–59,
/// G3b 30–44, G4 15–29, G5 < 15. The bands are closed below (exactly 45 is G3a).
pub fn kdigo_gfr_category(egfr: f64) -> Option<&'static str> {
    if !egfr.is_finite() || egfr < 0.0 {
        return None;
    }
    Some(match egfr {
        e if e >= 90.0 => "G1",
        e if e >= 60.0 => "G2",
        e if e >= 45.0 => "G3a",
        e if e >= 30.0 => "G3b",
        e if e >= 15.0 => "G4",
        _ => "G5",
    })
}

/// KDIGO 2012 AKI stage by creatinine, for a result that meets the AKI definition: 3 when the
/// ratio to baseline is at least 3.0 or creatinine is at least `stage3_creatinine` (4.0 mg/dL by
/// default), 2 from a ratio of 2.0, else 1 (ratio 1.5–1.9 or the absolute rise alone). A missing
/// ratio (no baseline) is read as below 1.5.
pub fn kdigo_aki_stage(ratio: Option<f64>, creatinine_mg_dl: f64, stage3_creatinine: f64) -> u8 {
    let ratio = ratio.unwrap_or(0.0);
    if ratio >= 3.0 || creatinine_mg_dl >= stage3_creatinine {
        3
    } else if ratio >= 2.0 {
        2
    } else {
        1
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Worked values of DOMAIN.md §2.4, computed there from the published CKD-EPI 2021 equation
    /// (Inker et al. 2021); the first case is also given as ≈76 by the NKF calculator page.
    #[test]
    fn ckd_epi_2021_worked_examples() {
        let cases = [
            (Sex::Female, 55.0, 0.9, 75.5, "G2"),
            (Sex::Male, 50.0, 1.0, 91.7, "G1"),
            (Sex::Female, 40.0, 0.6, 116.3, "G1"),
            (Sex::Male, 60.0, 1.2, 69.2, "G2"),
            (Sex::Female, 72.0, 1.5, 36.8, "G3b"),
            (Sex::Male, 70.0, 2.5, 27.0, "G4"),
            (Sex::Male, 80.0, 4.0, 14.4, "G5"),
        ];
        for (sex, age, scr, expected, category) in cases {
            let e = ckd_epi_2021(scr, age, sex).unwrap();
            assert!(
                (e - expected).abs() < 0.05,
                "{sex:?} {age} {scr}: {e} vs {expected}"
            );
            assert_eq!(kdigo_gfr_category(e), Some(category));
        }
    }

    #[test]
    fn ckd_epi_2021_is_for_adults_with_a_creatinine() {
        assert_eq!(ckd_epi_2021(1.0, 17.9, Sex::Male), None);
        assert!(ckd_epi_2021(1.0, 18.0, Sex::Male).is_some());
        assert_eq!(ckd_epi_2021(0.0, 50.0, Sex::Female), None);
        assert_eq!(ckd_epi_2021(f64::NAN, 50.0, Sex::Female), None);
        assert_eq!(Sex::from_code("U"), None);
        // At Scr = κ both power terms are 1: eGFR = 142 × 0.9938^age (× 1.012 female).
        let e = ckd_epi_2021(0.9, 40.0, Sex::Male).unwrap();
        assert!((e - 142.0 * 0.9938f64.powf(40.0)).abs() < 1e-9);
    }

    /// KDIGO 2012 GFR categories (Kidney Int Suppl 2013;3:1–150) at every boundary.
    #[test]
    fn gfr_categories_at_their_boundaries() {
        for (e, c) in [
            (120.0, "G1"),
            (90.0, "G1"),
            (89.99, "G2"),
            (60.0, "G2"),
            (59.99, "G3a"),
            (45.0, "G3a"),
            (44.99, "G3b"),
            (30.0, "G3b"),
            (29.99, "G4"),
            (15.0, "G4"),
            (14.99, "G5"),
            (0.0, "G5"),
        ] {
            assert_eq!(kdigo_gfr_category(e), Some(c), "{e}");
        }
        assert_eq!(kdigo_gfr_category(f64::NAN), None);
    }

    /// KDIGO 2012 AKI stages by creatinine (Kidney Int Suppl 2012;2:1–138, table 2), hand cases.
    #[test]
    fn aki_stages_by_hand() {
        // 1.0 → 1.35 mg/dL in 48 h: the absolute rise alone, ratio 1.35: stage 1.
        assert_eq!(kdigo_aki_stage(Some(1.35), 1.35, 4.0), 1);
        assert_eq!(kdigo_aki_stage(Some(1.5), 1.5, 4.0), 1);
        assert_eq!(kdigo_aki_stage(Some(1.99), 1.99, 4.0), 1);
        assert_eq!(kdigo_aki_stage(Some(2.0), 2.0, 4.0), 2);
        assert_eq!(kdigo_aki_stage(Some(2.99), 2.99, 4.0), 2);
        assert_eq!(kdigo_aki_stage(Some(3.0), 3.0, 4.0), 3);
        // 3.0 → 4.0 mg/dL: ratio 1.33 but creatinine ≥ 4.0 mg/dL during AKI: stage 3.
        assert_eq!(kdigo_aki_stage(Some(1.33), 4.0, 4.0), 3);
        assert_eq!(kdigo_aki_stage(None, 1.2, 4.0), 1);
    }
}
