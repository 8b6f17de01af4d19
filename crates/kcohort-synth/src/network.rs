//! The fictional network: Larkmoor Health, an integrated health system with three hospitals. Its
//! members' hospital care and outpatient pharmacy dispensings are all in the extract, so every
//! patient is observed from the start of the period to death or the extract end. All names are
//! invented.

/// The network's name as written in truth.json and the README.
pub const NETWORK_NAME: &str = "Larkmoor Health";

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum CreatinineReporting {
    /// mg/dL, LOINC 2160-0, two decimals.
    MassPerVolume,
    /// µmol/L (micro sign, sometimes written `umol/L`), LOINC 14682-9, whole numbers.
    MolesPerVolume,
}

/// How a site's laboratory reports results.
#[derive(Debug, Clone, Copy)]
pub struct Site {
    pub name: &'static str,
    pub code: &'static str,
    /// Share of the network's patients who live near this site (home site). Common practice.
    pub patient_share: f64,
    /// Unit string written for potassium, sodium, chloride and bicarbonate.
    pub electrolyte_unit: &'static str,
    pub creatinine: CreatinineReporting,
    /// Share of serum/plasma potassium results that carry a hemolysis index (the rest leave the
    /// column empty). From memory: most modern analysers report the index with every chemistry
    /// specimen; the community hospital's older analyser does not always.
    pub hemolysis_index_share: f64,
    /// Whether the laboratory system writes seconds in collection times.
    pub collection_seconds: bool,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum UnitKind {
    Emergency,
    Medicine,
    Cardiology,
    Renal,
    Elderly,
    Surgery,
    CriticalCare,
    Clinic,
}

#[derive(Debug, Clone, Copy)]
pub struct Unit {
    pub name: &'static str,
    pub site: usize,
    pub kind: UnitKind,
}

pub const SITES: [Site; 3] = [
    Site {
        name: "Larkmoor General",
        code: "LG",
        patient_share: 0.5,
        electrolyte_unit: "mmol/L",
        creatinine: CreatinineReporting::MassPerVolume,
        hemolysis_index_share: 0.97,
        collection_seconds: true,
    },
    Site {
        name: "Fenwick Community",
        code: "FC",
        patient_share: 0.3,
        electrolyte_unit: "mmol/L",
        creatinine: CreatinineReporting::MassPerVolume,
        hemolysis_index_share: 0.80,
        collection_seconds: false,
    },
    // The site that reports in SI style: potassium in mEq/L and creatinine in µmol/L.
    Site {
        name: "Ashby Vale",
        code: "AV",
        patient_share: 0.2,
        electrolyte_unit: "mEq/L",
        creatinine: CreatinineReporting::MolesPerVolume,
        hemolysis_index_share: 0.95,
        collection_seconds: false,
    },
];

/// The units encounters are attributed to. Index into this array = unit id.
pub const UNITS: [Unit; 15] = [
    Unit {
        name: "Larkmoor General Emergency Department",
        site: 0,
        kind: UnitKind::Emergency,
    },
    Unit {
        name: "Larkmoor General Acute Medical Unit",
        site: 0,
        kind: UnitKind::Medicine,
    },
    Unit {
        name: "Larkmoor General Ward 5 Cardiology",
        site: 0,
        kind: UnitKind::Cardiology,
    },
    Unit {
        name: "Larkmoor General Ward 7 Renal",
        site: 0,
        kind: UnitKind::Renal,
    },
    Unit {
        name: "Larkmoor General Ward 9 Surgery",
        site: 0,
        kind: UnitKind::Surgery,
    },
    Unit {
        name: "Larkmoor General Critical Care",
        site: 0,
        kind: UnitKind::CriticalCare,
    },
    Unit {
        name: "Larkmoor General Kidney and Heart Clinic",
        site: 0,
        kind: UnitKind::Clinic,
    },
    Unit {
        name: "Fenwick Community Urgent Care",
        site: 1,
        kind: UnitKind::Emergency,
    },
    Unit {
        name: "Fenwick Community Elm Ward (older people)",
        site: 1,
        kind: UnitKind::Elderly,
    },
    // A name with a comma, so the CSV writer's quoting is exercised by real rows.
    Unit {
        name: "Fenwick Community Birch Ward, general medicine",
        site: 1,
        kind: UnitKind::Medicine,
    },
    Unit {
        name: "Fenwick Community Outpatients",
        site: 1,
        kind: UnitKind::Clinic,
    },
    Unit {
        name: "Ashby Vale Emergency Department",
        site: 2,
        kind: UnitKind::Emergency,
    },
    Unit {
        name: "Ashby Vale Heron Ward (medicine)",
        site: 2,
        kind: UnitKind::Medicine,
    },
    Unit {
        name: "Ashby Vale Kestrel Ward (surgery)",
        site: 2,
        kind: UnitKind::Surgery,
    },
    Unit {
        name: "Ashby Vale Outpatients",
        site: 2,
        kind: UnitKind::Clinic,
    },
];

/// The unit whose hospital-acquired rate steps up by default.
pub const DEFAULT_STEP_UNIT: &str = "Larkmoor General Ward 5 Cardiology";

pub fn unit_id(name: &str) -> Option<usize> {
    UNITS.iter().position(|u| u.name == name)
}

/// The units of `site` of one kind, in table order.
pub fn units_of(site: usize, kind: UnitKind) -> impl Iterator<Item = usize> {
    UNITS
        .iter()
        .enumerate()
        .filter(move |(_, u)| u.site == site && u.kind == kind)
        .map(|(i, _)| i)
}

/// The first unit of `site` of `kind`, falling back to the site's medical ward (Fenwick has no
/// surgical, cardiology, renal or critical care unit; its patients needing one are admitted to
/// Birch Ward, which is the usual arrangement in a community hospital).
pub fn unit_for(site: usize, kind: UnitKind) -> usize {
    units_of(site, kind)
        .next()
        .or_else(|| units_of(site, UnitKind::Medicine).next())
        .expect("every site has a medical ward")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_site_has_an_emergency_department_a_medical_ward_and_a_clinic() {
        for site in 0..SITES.len() {
            for kind in [UnitKind::Emergency, UnitKind::Medicine, UnitKind::Clinic] {
                assert_eq!(units_of(site, kind).count(), 1, "site {site} {kind:?}");
            }
        }
        let shares: f64 = SITES.iter().map(|s| s.patient_share).sum();
        assert!((shares - 1.0).abs() < 1e-12);
    }

    #[test]
    fn unit_names_are_unique_and_the_default_step_unit_exists() {
        for (i, u) in UNITS.iter().enumerate() {
            assert_eq!(unit_id(u.name), Some(i));
            assert!(u.name.starts_with(SITES[u.site].name), "{}", u.name);
        }
        assert!(unit_id(DEFAULT_STEP_UNIT).is_some());
    }

    #[test]
    fn reported_units_are_accepted_by_the_contract() {
        use kcohort_model::Analyte;
        for site in SITES {
            for a in [
                Analyte::Potassium,
                Analyte::Sodium,
                Analyte::Chloride,
                Analyte::Bicarbonate,
            ] {
                assert!(
                    a.conversion_for(site.electrolyte_unit).is_some(),
                    "{a:?} {}",
                    site.electrolyte_unit
                );
            }
        }
    }
}
