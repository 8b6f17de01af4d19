//! The drugs the network prescribes, with WHO ATC codes from the domain reference §2.1–2.2 and
//! usual adult doses (from memory; the doses are descriptive and nothing is computed from them).

/// What a drug does in the simulation.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum DrugClass {
    AceInhibitor,
    AngiotensinReceptorBlocker,
    /// Sacubitril/valsartan: counted as a RAAS inhibitor.
    NeprilysinArb,
    Mra,
    PotassiumSparing,
    BetaBlocker,
    CalciumChannelBlocker,
    LoopDiuretic,
    Trimethoprim,
    Heparin,
    Nsaid,
    PotassiumOral,
    PotassiumIv,
    Metformin,
    BasalInsulin,
    SalbutamolInhaler,
    // Acute treatments of hyperkalemia.
    CalciumGluconate,
    RegularInsulin,
    GlucoseIv,
    SalbutamolNebulised,
    SodiumBicarbonate,
    Binder,
    LoopIv,
}

#[derive(Debug, Clone, Copy)]
pub struct Drug {
    pub atc: &'static str,
    pub name: &'static str,
    pub class: DrugClass,
    pub route: &'static str,
    pub dose: &'static str,
    pub dose_unit: &'static str,
}

const fn drug(
    atc: &'static str,
    name: &'static str,
    class: DrugClass,
    route: &'static str,
    dose: &'static str,
    dose_unit: &'static str,
) -> Drug {
    Drug {
        atc,
        name,
        class,
        route,
        dose,
        dose_unit,
    }
}

use DrugClass::*;

pub const ACE_INHIBITORS: &[Drug] = &[
    drug("C09AA05", "ramipril", AceInhibitor, "PO", "5", "mg"),
    drug("C09AA03", "lisinopril", AceInhibitor, "PO", "10", "mg"),
    drug("C09AA02", "enalapril", AceInhibitor, "PO", "10", "mg"),
    drug("C09AA04", "perindopril", AceInhibitor, "PO", "4", "mg"),
];

pub const ARBS: &[Drug] = &[
    drug(
        "C09CA01",
        "losartan",
        AngiotensinReceptorBlocker,
        "PO",
        "50",
        "mg",
    ),
    drug(
        "C09CA03",
        "valsartan",
        AngiotensinReceptorBlocker,
        "PO",
        "80",
        "mg",
    ),
    drug(
        "C09CA06",
        "candesartan",
        AngiotensinReceptorBlocker,
        "PO",
        "8",
        "mg",
    ),
    drug(
        "C09CA04",
        "irbesartan",
        AngiotensinReceptorBlocker,
        "PO",
        "150",
        "mg",
    ),
    drug(
        "C09CA07",
        "telmisartan",
        AngiotensinReceptorBlocker,
        "PO",
        "40",
        "mg",
    ),
];

pub const SACUBITRIL_VALSARTAN: Drug = drug(
    "C09DX04",
    "sacubitril/valsartan",
    NeprilysinArb,
    "PO",
    "97",
    "mg",
);

pub const MRAS: &[Drug] = &[
    drug("C03DA01", "spironolactone", Mra, "PO", "25", "mg"),
    drug("C03DA04", "eplerenone", Mra, "PO", "25", "mg"),
];

pub const AMILORIDE: Drug = drug("C03DB01", "amiloride", PotassiumSparing, "PO", "5", "mg");

pub const BETA_BLOCKERS: &[Drug] = &[
    drug("C07AB07", "bisoprolol", BetaBlocker, "PO", "2.5", "mg"),
    drug("C07AB02", "metoprolol", BetaBlocker, "PO", "50", "mg"),
    drug("C07AB03", "atenolol", BetaBlocker, "PO", "50", "mg"),
    drug("C07AG02", "carvedilol", BetaBlocker, "PO", "6.25", "mg"),
];

pub const CALCIUM_CHANNEL_BLOCKERS: &[Drug] = &[
    drug(
        "C08CA01",
        "amlodipine",
        CalciumChannelBlocker,
        "PO",
        "5",
        "mg",
    ),
    drug(
        "C08CA13",
        "lercanidipine",
        CalciumChannelBlocker,
        "PO",
        "10",
        "mg",
    ),
    drug(
        "C08CA05",
        "nifedipine",
        CalciumChannelBlocker,
        "PO",
        "30",
        "mg",
    ),
];

pub const LOOP_DIURETICS: &[Drug] = &[
    drug("C03CA01", "furosemide", LoopDiuretic, "PO", "40", "mg"),
    drug("C03CA04", "torasemide", LoopDiuretic, "PO", "10", "mg"),
];

pub const POTASSIUM_CHLORIDE_ORAL: Drug = drug(
    "A12BA01",
    "potassium chloride",
    PotassiumOral,
    "PO",
    "600",
    "mg",
);

pub const NSAIDS: &[Drug] = &[
    drug("M01AE01", "ibuprofen", Nsaid, "PO", "400", "mg"),
    drug("M01AE02", "naproxen", Nsaid, "PO", "500", "mg"),
    drug("M01AB05", "diclofenac", Nsaid, "PO", "50", "mg"),
];

pub const TRIMETHOPRIM: Drug = drug("J01EA01", "trimethoprim", Trimethoprim, "PO", "200", "mg");
pub const CO_TRIMOXAZOLE: Drug = drug("J01EE01", "co-trimoxazole", Trimethoprim, "PO", "960", "mg");

pub const METFORMIN: Drug = drug("A10BA02", "metformin", Metformin, "PO", "1000", "mg");
pub const INSULIN_GLARGINE: Drug = drug(
    "A10AE04",
    "insulin glargine",
    BasalInsulin,
    "SC",
    "20",
    "unit",
);
pub const SALBUTAMOL_INHALER: Drug = drug(
    "R03AC02",
    "salbutamol inhaler",
    SalbutamolInhaler,
    "INH",
    "100",
    "microgram",
);

pub const ENOXAPARIN: Drug = drug("B01AB05", "enoxaparin", Heparin, "SC", "40", "mg");
pub const HEPARIN: Drug = drug("B01AB01", "heparin", Heparin, "SC", "5000", "unit");
pub const POTASSIUM_CHLORIDE_IV: Drug = drug(
    "B05XA01",
    "potassium chloride 0.15% in sodium chloride 0.9%",
    PotassiumIv,
    "IV",
    "20",
    "mmol",
);
pub const CO_TRIMOXAZOLE_IV: Drug =
    drug("J01EE01", "co-trimoxazole", Trimethoprim, "IV", "960", "mg");

// Acute treatments (UKKA 2023 regimen as summarised in the domain reference §2.2).
pub const CALCIUM_GLUCONATE: Drug = drug(
    "A12AA03",
    "calcium gluconate 10%",
    CalciumGluconate,
    "IV",
    "30",
    "mL",
);
/// Name with a comma, as pharmacy systems often write it; exercises CSV quoting.
pub const INSULIN_SOLUBLE: Drug = drug(
    "A10AB01",
    "insulin human, soluble",
    RegularInsulin,
    "IV",
    "10",
    "unit",
);
pub const GLUCOSE_IV: Drug = drug("B05BA03", "glucose 50%", GlucoseIv, "IV", "25", "g");
pub const SALBUTAMOL_NEBULISED: Drug = drug(
    "R03AC02",
    "salbutamol nebuliser solution",
    SalbutamolNebulised,
    "INH",
    "10",
    "mg",
);
pub const SODIUM_BICARBONATE: Drug = drug(
    "B05XA02",
    "sodium bicarbonate 8.4%",
    SodiumBicarbonate,
    "IV",
    "100",
    "mmol",
);
pub const BINDERS: &[Drug] = &[
    drug(
        "V03AE10",
        "sodium zirconium cyclosilicate",
        Binder,
        "PO",
        "10",
        "g",
    ),
    drug("V03AE09", "patiromer", Binder, "PO", "8.4", "g"),
    drug(
        "V03AE01",
        "calcium polystyrene sulfonate",
        Binder,
        "PO",
        "15",
        "g",
    ),
];
pub const FUROSEMIDE_IV: Drug = drug("C03CA01", "furosemide", LoopIv, "IV", "40", "mg");

/// ATC codes whose administration within 6 h of a high potassium marks it as treated (the
/// confirmation rule of the domain reference §1.3): calcium, regular insulin, nebulised
/// salbutamol, IV bicarbonate, binders and IV loop diuretics.
#[cfg(test)]
pub const TREATMENT_ATC: &[&str] = &[
    "A12AA03", "A10AB01", "R03AC02", "B05XA02", "V03AE10", "V03AE09", "V03AE01", "C03CA01",
];

#[cfg(test)]
mod tests {
    use super::*;

    fn all() -> Vec<Drug> {
        let mut v: Vec<Drug> = Vec::new();
        for list in [
            ACE_INHIBITORS,
            ARBS,
            MRAS,
            BETA_BLOCKERS,
            CALCIUM_CHANNEL_BLOCKERS,
            LOOP_DIURETICS,
            NSAIDS,
            BINDERS,
        ] {
            v.extend_from_slice(list);
        }
        v.extend([
            SACUBITRIL_VALSARTAN,
            AMILORIDE,
            POTASSIUM_CHLORIDE_ORAL,
            TRIMETHOPRIM,
            CO_TRIMOXAZOLE,
            METFORMIN,
            INSULIN_GLARGINE,
            SALBUTAMOL_INHALER,
            ENOXAPARIN,
            HEPARIN,
            POTASSIUM_CHLORIDE_IV,
            CO_TRIMOXAZOLE_IV,
            CALCIUM_GLUCONATE,
            INSULIN_SOLUBLE,
            GLUCOSE_IV,
            SALBUTAMOL_NEBULISED,
            SODIUM_BICARBONATE,
            FUROSEMIDE_IV,
        ]);
        v
    }

    #[test]
    fn codes_routes_and_doses_are_well_formed() {
        for d in all() {
            assert!(kcohort_model::code::is_valid_atc(d.atc), "{}", d.atc);
            assert!(
                kcohort_model::contract::ROUTES.contains(&d.route),
                "{} {}",
                d.name,
                d.route
            );
            assert!(
                d.dose.parse::<f64>().is_ok_and(|x| x > 0.0),
                "{} {}",
                d.name,
                d.dose
            );
        }
    }

    #[test]
    fn classes_sit_under_their_atc_groups() {
        // Domain reference §2.1: ACE inhibitors C09A, ARBs C09C, MRAs C03DA, beta-blockers C07,
        // dihydropyridine CCBs C08CA, heparins B01AB, NSAIDs M01A, binders V03AE.
        let groups: &[(&[Drug], &str)] = &[
            (ACE_INHIBITORS, "C09A"),
            (ARBS, "C09C"),
            (MRAS, "C03DA"),
            (BETA_BLOCKERS, "C07"),
            (CALCIUM_CHANNEL_BLOCKERS, "C08CA"),
            (NSAIDS, "M01A"),
            (BINDERS, "V03AE"),
            (LOOP_DIURETICS, "C03CA"),
        ];
        for (drugs, prefix) in groups {
            for d in *drugs {
                assert!(d.atc.starts_with(prefix), "{} {}", d.name, d.atc);
            }
        }
        for d in all() {
            let is_treatment_code = TREATMENT_ATC.contains(&d.atc);
            let is_acute = matches!(
                d.class,
                CalciumGluconate
                    | RegularInsulin
                    | SalbutamolNebulised
                    | SodiumBicarbonate
                    | Binder
                    | LoopIv
            );
            // Oral furosemide and the salbutamol inhaler share a code with an acute treatment;
            // they are dispensed (never administered), which is how readers tell them apart.
            if is_acute {
                assert!(is_treatment_code, "{}", d.name);
            }
        }
    }
}
