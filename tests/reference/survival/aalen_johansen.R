# Aalen-Johansen (competing risks) reference values, for
# crates/kcohort-stats/tests/reference_survival.rs.
#
# Data: survival::mgus2, time to plasma-cell malignancy (pcm, event code 1) with death before pcm
# as the competing event (code 2), as in the survival package's "compete" vignette.
# Writes: mgus2.csv (input) and aalen_johansen.json:
#  - survival::survfit(Surv(etime, factor(event)) ~ 1): state probabilities (event-free, pcm,
#    death) and their standard errors (survfit's infinitesimal-jackknife default);
#  - the same with late entry (an artificial entry time, to exercise (start, stop] data);
#  - cmprsk::cuminc: cumulative incidence, its variance and Gray's test by sex, unstratified and
#    stratified by age group.

source(file.path(dirname(sub("^--file=", "", grep("^--file=", commandArgs(FALSE), value = TRUE))), "common.R"))
suppressPackageStartupMessages(library(cmprsk))

etime <- with(mgus2, ifelse(pstat == 0, futime, ptime))
event <- with(mgus2, ifelse(pstat == 0, 2 * death, 1))
# Artificial late entry: every third subject enters at a third of its follow-up (months, floored).
entry <- ifelse(mgus2$id %% 3 == 0, floor(etime / 3), 0)
mg <- data.frame(id = mgus2$id, sex = as.integer(mgus2$sex == "M"),
                 age_group = as.integer(mgus2$age >= 70), entry = entry, etime = etime,
                 event = event)
write_input(mg, "mgus2.csv")

# `subset_column`/`subset_value`/`entry` tell the Rust side which rows of mgus2.csv were used.
aj_record <- function(label, fit, subset_column = NA, subset_value = NA, entry = NA) {
  list(label = label, subset_column = subset_column, subset_value = subset_value, entry = entry,
       states = fit$states, time = fit$time, n_risk = fit$n.risk[, 1],
       n_event = unname(fit$n.event), pstate = unname(fit$pstate),
       std_err = unname(fit$std.err))
}

ev <- factor(mg$event, 0:2, labels = c("censor", "pcm", "death"))
curves <- list(
  aj_record("mgus2 all", survfit(Surv(etime, ev) ~ 1, data = mg)),
  aj_record("mgus2 sex=0", survfit(Surv(etime, ev) ~ 1, data = mg, subset = sex == 0), "sex", 0),
  aj_record("mgus2 sex=1", survfit(Surv(etime, ev) ~ 1, data = mg, subset = sex == 1), "sex", 1),
  aj_record("mgus2 late entry", survfit(Surv(entry, etime, ev) ~ 1, data = mg, id = id),
            entry = "entry")
)

cuminc_record <- function(label, ci, strata) {
  tests <- ci$Tests
  curves <- ci[names(ci) != "Tests"]
  list(label = label, strata = if (is.null(strata)) NA else strata,
       gray_stat = unname(tests[, "stat"]), gray_p_value = unname(tests[, "pv"]),
       gray_df = unname(tests[, "df"]), causes = as.numeric(rownames(tests)),
       curves = lapply(names(curves), function(nm) list(name = nm, time = curves[[nm]]$time,
                                                       est = curves[[nm]]$est,
                                                       var = curves[[nm]]$var)))
}
gray <- list(
  cuminc_record("mgus2 by sex", cuminc(mg$etime, mg$event, group = mg$sex, cencode = 0), NULL),
  cuminc_record("mgus2 by sex, strata age_group",
                cuminc(mg$etime, mg$event, group = mg$sex, strata = mg$age_group, cencode = 0),
                "age_group")
)

write_fixture(list(
  source = provenance(list(
    cmprsk_version = as.character(packageVersion("cmprsk")),
    call = "survfit(Surv(etime, factor(event)) ~ 1); cmprsk::cuminc(etime, event, group = sex [, strata = age_group], cencode = 0)")),
  aalen_johansen = curves,
  cuminc = gray
), "aalen_johansen.json")
