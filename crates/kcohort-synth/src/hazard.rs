//! The planted hazard model: a baseline hazard of a true high-potassium episode, per day at risk,
//! times the hazard ratio of every factor present. Factors are bits of a mask, so the hazard of a
//! stretch of time is one product.

use crate::config::{HazardRatios, SynthConfig};
use crate::random::Rng;

#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum Factor {
    EgfrBelow45,
    Diabetes,
    AdrenalInsufficiency,
    AcuteKidneyInjury,
    RaasInhibitor,
    CalciumChannelBlocker,
    Mra,
    PotassiumSparingDiuretic,
    BetaBlocker,
    Trimethoprim,
    Heparin,
    Nsaid,
    PotassiumSupplementOral,
    PotassiumIv,
}

pub const FACTORS: [Factor; 14] = [
    Factor::EgfrBelow45,
    Factor::Diabetes,
    Factor::AdrenalInsufficiency,
    Factor::AcuteKidneyInjury,
    Factor::RaasInhibitor,
    Factor::CalciumChannelBlocker,
    Factor::Mra,
    Factor::PotassiumSparingDiuretic,
    Factor::BetaBlocker,
    Factor::Trimethoprim,
    Factor::Heparin,
    Factor::Nsaid,
    Factor::PotassiumSupplementOral,
    Factor::PotassiumIv,
];

/// Label of episodes attributed to no factor.
pub const BACKGROUND: &str = "background";

impl Factor {
    pub fn bit(self) -> u32 {
        1 << (self as u32)
    }

    pub fn index(self) -> usize {
        self as usize
    }

    /// Stable name used in truth.json (same as the hazard-ratio setting where there is one).
    pub fn name(self) -> &'static str {
        match self {
            Factor::EgfrBelow45 => "egfr_below_45",
            Factor::Diabetes => "diabetes",
            Factor::AdrenalInsufficiency => "adrenal_insufficiency",
            Factor::AcuteKidneyInjury => "acute_kidney_injury",
            Factor::RaasInhibitor => "raas_inhibitor",
            Factor::CalciumChannelBlocker => "calcium_channel_blocker",
            Factor::Mra => "mra",
            Factor::PotassiumSparingDiuretic => "potassium_sparing_diuretic",
            Factor::BetaBlocker => "beta_blocker",
            Factor::Trimethoprim => "trimethoprim",
            Factor::Heparin => "heparin",
            Factor::Nsaid => "nsaid",
            Factor::PotassiumSupplementOral => "potassium_supplement_oral",
            Factor::PotassiumIv => "potassium_iv",
        }
    }

    pub fn is_active(self, mask: u32) -> bool {
        mask & self.bit() != 0
    }
}

#[derive(Debug, Clone)]
pub struct HazardModel {
    ratio: [f64; 14],
    mra_egfr_below_45: f64,
    pub community_per_day: f64,
    pub inpatient_per_day: f64,
}

impl HazardModel {
    pub fn new(config: &SynthConfig) -> HazardModel {
        let h: &HazardRatios = &config.hazard_ratios;
        let mut ratio = [1.0; 14];
        for f in FACTORS {
            ratio[f.index()] = match f {
                Factor::EgfrBelow45 => h.egfr_below_45,
                Factor::Diabetes => h.diabetes,
                Factor::AdrenalInsufficiency => h.adrenal_insufficiency,
                Factor::AcuteKidneyInjury => h.acute_kidney_injury,
                Factor::RaasInhibitor => h.raas_inhibitor,
                Factor::CalciumChannelBlocker => h.calcium_channel_blocker,
                Factor::Mra => h.mra,
                Factor::PotassiumSparingDiuretic => h.potassium_sparing_diuretic,
                Factor::BetaBlocker => h.beta_blocker,
                Factor::Trimethoprim => h.trimethoprim,
                Factor::Heparin => h.heparin,
                Factor::Nsaid => h.nsaid,
                Factor::PotassiumSupplementOral => h.potassium_supplement_oral,
                Factor::PotassiumIv => h.potassium_iv,
            };
        }
        HazardModel {
            ratio,
            mra_egfr_below_45: h.mra_egfr_below_45,
            community_per_day: config.community_hazard_per_day,
            inpatient_per_day: config.inpatient_hazard_per_day,
        }
    }

    /// The ratio of one factor for a patient with this mask (the MRA ratio depends on eGFR).
    pub fn factor_ratio(&self, factor: Factor, mask: u32) -> f64 {
        if factor == Factor::Mra && Factor::EgfrBelow45.is_active(mask) {
            self.mra_egfr_below_45
        } else {
            self.ratio[factor.index()]
        }
    }

    /// Product of the ratios of every factor in `mask`.
    pub fn ratio(&self, mask: u32) -> f64 {
        let mut product = 1.0;
        let mut bits = mask;
        while bits != 0 {
            let i = bits.trailing_zeros() as usize;
            product *= self.factor_ratio(FACTORS[i], mask);
            bits &= bits - 1;
        }
        product
    }

    /// The cause label of an episode with factors `mask`: with probability 1/HR no factor
    /// (the share a patient without factors would have had anyway), otherwise one present factor
    /// with HR > 1 chosen with probability proportional to ln HR (its share of the log hazard).
    /// This is one conventional split of a multiplicative excess; analyses detect exposures,
    /// not these labels, and truth.json also counts every factor present at onset.
    pub fn attribute(&self, mask: u32, rng: &mut Rng) -> Option<Factor> {
        let total = self.ratio(mask);
        if total <= 1.0 || rng.bernoulli(1.0 / total) {
            return None;
        }
        let mut weights = [0.0; 14];
        for f in FACTORS {
            if f.is_active(mask) {
                weights[f.index()] = self.factor_ratio(f, mask).ln().max(0.0);
            }
        }
        if weights.iter().sum::<f64>() <= 0.0 {
            return None;
        }
        Some(FACTORS[rng.categorical(&weights)])
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ratios_multiply_and_mra_depends_on_egfr() {
        let m = HazardModel::new(&SynthConfig::default());
        let h = HazardRatios::default();
        assert_eq!(m.ratio(0), 1.0);
        assert!((m.ratio(Factor::Mra.bit()) - h.mra).abs() < 1e-12);
        let low = Factor::EgfrBelow45.bit() | Factor::Mra.bit();
        assert!((m.ratio(low) - h.egfr_below_45 * h.mra_egfr_below_45).abs() < 1e-12);
        let several = Factor::RaasInhibitor.bit() | Factor::Diabetes.bit() | Factor::Heparin.bit();
        assert!((m.ratio(several) - h.raas_inhibitor * h.diabetes * h.heparin).abs() < 1e-12);
    }

    #[test]
    fn attribution_shares() {
        // With one factor of HR 2.5, the label is that factor with probability 1 − 1/2.5 = 0.6.
        let m = HazardModel::new(&SynthConfig::default());
        let mut rng = Rng::seeded(9);
        let n = 50_000;
        let hits = (0..n)
            .filter(|_| m.attribute(Factor::EgfrBelow45.bit(), &mut rng).is_some())
            .count();
        let share = hits as f64 / f64::from(n);
        // Binomial SD at n = 50 000: √(0.6·0.4/50 000) ≈ 0.0022; allow 5 SD.
        assert!((share - 0.6).abs() < 0.011, "{share}");
        // A factor with HR 1 is never the label.
        for _ in 0..1000 {
            assert_eq!(
                m.attribute(Factor::CalciumChannelBlocker.bit(), &mut rng),
                None
            );
        }
    }

    #[test]
    fn names_are_unique() {
        let mut names: Vec<&str> = FACTORS.iter().map(|f| f.name()).collect();
        names.sort_unstable();
        names.dedup();
        assert_eq!(names.len(), FACTORS.len());
        for (i, f) in FACTORS.iter().enumerate() {
            assert_eq!(f.index(), i);
        }
    }
}
