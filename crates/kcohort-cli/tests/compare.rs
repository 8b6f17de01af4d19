//! Planted truths through `kcohort compare`: the generator multiplies the hazard of an episode
//! by a planted ratio for RAAS-inhibitor users (truth.json `hazard_ratios.raas_inhibitor`;
//! calcium-channel-blocker users have 1). With the ratio set to 4, the Cox hazard ratio of
//! ACE-inhibitor new users against calcium-channel-blocker new users, and the Mantel–Haenszel
//! risk ratio by eGFR category (for a rare outcome close to the hazard ratio), cover 4 and
//! exclude 1; with the effect switched off (1) they cover 1. Three seeds each, and each interval
//! must do so in at least two of three (a 95% interval misses about one time in twenty), so the
//! test is about coverage, not one lucky seed. (The default ratio, 1.8, needs about a million
//! patients to be told from 1 with these new-user counts: too slow for a debug test.) The
//! time-varying exposure model (on drug vs on comparator drug, counting-process rows) must cover
//! the planted ratio likewise: the generator applies it while the drug is taken.
//!
//! The eGFR interaction: the generator's MRA ratio is `mra` at eGFR >= 45 and
//! `mra_egfr_below_45` below it; planted 2 and 8, the Cox hazard ratios of MRA against
//! calcium-channel-blocker new users within the two eGFR bands must cover 2 and 8, and their
//! ratio (the interaction, 4) must be covered and exceed 1, in at least two of three seeds.
//! (The generator classifies patients by their usual creatinine, the analysis by the median
//! measured eGFR of the baseline year, so some patients fall in the other band and the
//! below-45 estimate is pulled towards the other: at 250,000 patients it reads about 4–5
//! instead of 8 and the interaction about 2.5–3 instead of 4, still covered by the intervals.)

use serde_json::Value;
use std::path::{Path, PathBuf};
use std::process::Command;

fn kcohort() -> Command {
    Command::new(env!("CARGO_BIN_EXE_kcohort"))
}

fn ok(mut c: Command) -> String {
    let out = c.output().unwrap();
    assert!(
        out.status.success(),
        "{c:?} failed:\n{}",
        String::from_utf8_lossy(&out.stderr)
    );
    String::from_utf8_lossy(&out.stdout).into_owned()
}

/// A derived store of `patients` synthetic patients with these generator settings.
fn store(dir: &Path, name: &str, seed: u64, patients: u64, settings_json: &str) -> PathBuf {
    let extract = dir.join(format!("extract-{name}"));
    let store = dir.join(format!("store-{name}"));
    let settings = dir.join(format!("settings-{name}.json"));
    std::fs::write(&settings, settings_json).unwrap();
    let mut synth = kcohort();
    synth.args([
        "synth",
        "--patients",
        &patients.to_string(),
        "--seed",
        &seed.to_string(),
        "--out",
    ]);
    synth.arg(&extract).arg("--settings").arg(&settings);
    ok(synth);
    let mut ingest = kcohort();
    ingest
        .arg("ingest")
        .arg(&extract)
        .arg("--store")
        .arg(&store);
    ingest.args([
        "--site-timezone",
        "Europe/Vienna",
        "--extract-end",
        "2026-01-05T00:00",
    ]);
    ok(ingest);
    let mut derive = kcohort();
    derive.args(["derive", "--store"]).arg(&store);
    ok(derive);
    std::fs::remove_dir_all(&extract).unwrap();
    store
}

fn pair(v: &Value) -> [f64; 2] {
    [v[0].as_f64().unwrap(), v[1].as_f64().unwrap()]
}

/// The exposure's coefficient of a Cox fit in the JSON.
fn first_coefficient(fit: &Value) -> &Value {
    fit["coefficients"]
        .as_array()
        .and_then(|c| c.first())
        .unwrap_or_else(|| panic!("no Cox fit: {fit}"))
}

/// (Cox, Mantel–Haenszel, time-varying Cox) intervals of the exposure for one seed and ratio.
fn compare(dir: &Path, seed: u64, raas_ratio: f64) -> ([f64; 2], [f64; 2], [f64; 2]) {
    let store = store(
        dir,
        &format!("{seed}-{raas_ratio}"),
        seed,
        100_000,
        &format!("{{\"hazard_ratios\": {{\"raas_inhibitor\": {raas_ratio}}}}}"),
    );
    let mut c = kcohort();
    c.args(["compare", "--store"]).arg(&store);
    c.args([
        "--exposure",
        "ace_inhibitor",
        "--comparator",
        "calcium_channel_blocker",
    ]);
    // Neither arm may hold another RAAS inhibitor (the generator's effect is for ACE inhibitors
    // and ARBs alike), or the comparator arm carries part of the effect.
    c.args([
        "--exclude-users-of",
        "arb",
        "--horizon",
        "90d",
        "--format",
        "json",
    ]);
    let result: Value = serde_json::from_str(&ok(c)).unwrap();
    assert!(
        result["mantel_haenszel_risk_ratio"]["interval"].is_array()
            && result["cox"]["coefficients"].is_array(),
        "seed {seed}: {}",
        serde_json::to_string_pretty(&result).unwrap()
    );
    let cox = first_coefficient(&result["cox"]);
    assert_eq!(cox["name"], "exposure");
    let tv = first_coefficient(&result["time_varying_cox"]);
    assert_eq!(tv["name"], "on exposure drug (time-varying)");
    (
        pair(&cox["interval"]),
        pair(&result["mantel_haenszel_risk_ratio"]["interval"]),
        pair(&tv["interval"]),
    )
}

#[test]
fn planted_hazard_ratios_are_covered_over_seeds() {
    let dir = tempfile::tempdir().unwrap();
    let mut report = Vec::new();
    for planted in [4.0, 1.0] {
        let (mut cox_cover, mut mh_cover, mut tv_cover, mut cox_above_one) = (0, 0, 0, 0);
        let mut estimates = Vec::new();
        for seed in [101, 102, 103] {
            let (cox, mh, tv) = compare(dir.path(), seed, planted);
            let covers = |i: [f64; 2]| i[0] <= planted && planted <= i[1];
            cox_cover += usize::from(covers(cox));
            mh_cover += usize::from(covers(mh));
            tv_cover += usize::from(covers(tv));
            cox_above_one += usize::from(cox[0] > 1.0);
            estimates.push((cox[0] * cox[1]).sqrt().ln());
            report.push(format!(
                "planted {planted} seed {seed}: Cox {cox:.2?}, MH {mh:.2?}, time-varying {tv:.2?}"
            ));
        }
        assert!(
            cox_cover >= 2 && mh_cover >= 2 && tv_cover >= 2,
            "{}",
            report.join("\n")
        );
        if planted > 1.0 {
            assert!(
                cox_above_one >= 2,
                "the effect is not detected:\n{}",
                report.join("\n")
            );
        }
    }
    eprintln!("{}", report.join("\n"));
}

#[test]
fn planted_egfr_interaction_is_recovered_over_seeds() {
    let dir = tempfile::tempdir().unwrap();
    let (low, high) = (8.0, 2.0);
    let mut report = Vec::new();
    let (mut low_cover, mut high_cover, mut ratio_cover, mut ratio_above_one) = (0, 0, 0, 0);
    for seed in [201, 202, 203] {
        let store = store(
            dir.path(),
            &format!("egfr-{seed}"),
            seed,
            250_000,
            &format!("{{\"hazard_ratios\": {{\"mra\": {high}, \"mra_egfr_below_45\": {low}}}}}"),
        );
        let mut c = kcohort();
        c.args(["compare", "--store"]).arg(&store);
        c.args([
            "--exposure",
            "mra",
            "--comparator",
            "calcium_channel_blocker",
            "--strata",
            "egfr_band",
            "--format",
            "json",
        ]);
        let result: Value = serde_json::from_str(&ok(c)).unwrap();
        let band = |name: &str| {
            let fit = result["strata_cox"]
                .as_array()
                .unwrap()
                .iter()
                .find(|s| s["stratum"] == name)
                .unwrap_or_else(|| panic!("no stratum {name}: {result}"));
            let c = first_coefficient(fit);
            assert_eq!(c["name"], "exposure");
            (
                c["hazard_ratio"].as_f64().unwrap().ln(),
                c["log_std_error"].as_f64().unwrap(),
                pair(&c["interval"]),
            )
        };
        let (b_low, se_low, i_low) = band("below 45");
        let (b_high, se_high, i_high) = band("45 or more");
        // The interaction as a ratio of the two hazard ratios; the bands are disjoint groups
        // of patients, so the two estimates are independent (Altman & Bland, BMJ
        // 2003;326:219).
        let d = b_low - b_high;
        let se = (se_low * se_low + se_high * se_high).sqrt();
        let i_ratio = [(d - 1.96 * se).exp(), (d + 1.96 * se).exp()];
        let covers = |i: [f64; 2], v: f64| i[0] <= v && v <= i[1];
        low_cover += usize::from(covers(i_low, low));
        high_cover += usize::from(covers(i_high, high));
        ratio_cover += usize::from(covers(i_ratio, low / high));
        ratio_above_one += usize::from(i_ratio[0] > 1.0);
        report.push(format!(
            "seed {seed}: below 45 {i_low:.2?}, 45 or more {i_high:.2?}, ratio {:.2} {i_ratio:.2?}",
            d.exp()
        ));
    }
    eprintln!("{}", report.join("\n"));
    assert!(
        low_cover >= 2 && high_cover >= 2 && ratio_cover >= 2,
        "{}",
        report.join("\n")
    );
    assert!(
        ratio_above_one >= 2,
        "the interaction is not detected:\n{}",
        report.join("\n")
    );
}

/// `kcohort causes` against its sources: each share is the count of confirmed episodes with the
/// cause over all confirmed episodes (counted here with `kcohort sql`), and each drug class's
/// risk ratio is the crude risk ratio `kcohort compare` gives for the same two arms.
#[test]
fn cause_table_agrees_with_its_sources() {
    let dir = tempfile::tempdir().unwrap();
    let store = store(dir.path(), "causes", 7, 50_000, "{}");
    let out = dir.path().join("causes");
    let mut c = kcohort();
    c.args(["causes", "--store"])
        .arg(&store)
        .arg("--out")
        .arg(&out);
    ok(c);
    let html = std::fs::read_to_string(out.join("causes.html")).unwrap();
    assert!(html.contains("not for decisions about individual patients"));
    let mut reader = csv::Reader::from_path(out.join("causes.csv")).unwrap();
    let headers = reader.headers().unwrap().clone();
    let rows: Vec<std::collections::BTreeMap<String, String>> = reader
        .records()
        .map(|r| {
            headers
                .iter()
                .zip(r.unwrap().iter())
                .map(|(h, v)| (h.to_string(), v.to_string()))
                .collect()
        })
        .collect();

    let mut sql = kcohort();
    sql.args(["sql", "--store"]).arg(&store).args([
        "--format",
        "json",
        "SELECT c.cause, COUNT(DISTINCT c.episode_id) AS n, \
         (SELECT COUNT(*) FROM episodes WHERE NOT unconfirmed) AS total \
         FROM episode_causes c JOIN episodes e ON e.episode_id = c.episode_id \
         WHERE NOT e.unconfirmed GROUP BY c.cause",
    ]);
    let counted: Value = serde_json::from_str(&ok(sql)).unwrap();
    let counted = counted.as_array().unwrap();
    assert!(counted.len() >= 5, "{counted:?}");
    for c in counted {
        let cause = c["cause"].as_str().unwrap();
        let row = rows
            .iter()
            .find(|r| r["cause"] == cause)
            .unwrap_or_else(|| panic!("no row for {cause}"));
        let (n, total) = (c["n"].as_u64().unwrap(), c["total"].as_u64().unwrap());
        assert_eq!(row["episodes_attributed"], n.to_string(), "{cause}");
        let share: f64 = row["share"].parse().unwrap();
        assert!((share - n as f64 / total as f64).abs() < 1e-12, "{cause}");
        let (lo, hi): (f64, f64) = (
            row["share_lower"].parse().unwrap(),
            row["share_upper"].parse().unwrap(),
        );
        assert!(lo <= share && share <= hi, "{cause}");
    }

    let mut checked = 0;
    for class in ["ace_inhibitor", "arb", "mra"] {
        let row = rows.iter().find(|r| r["cause"] == class).unwrap();
        let mut c = kcohort();
        c.args(["compare", "--store"]).arg(&store).args([
            "--exposure",
            class,
            "--comparator",
            "calcium_channel_blocker",
            "--format",
            "json",
        ]);
        let result: Value = serde_json::from_str(&ok(c)).unwrap();
        let Some(expected) = result["crude_risk_ratio"]["estimate"].as_f64() else {
            assert_eq!(row["risk_ratio"], "", "{class}");
            continue;
        };
        let got: f64 = row["risk_ratio"].parse().unwrap();
        assert!(
            (got - expected).abs() < 1e-9,
            "{class}: {got} vs {expected}"
        );
        checked += 1;
    }
    assert!(checked >= 2, "too few estimable classes to check");
}
