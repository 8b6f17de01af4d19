# Kaplan-Meier reference values from R's survival package (survfit), for
# crates/kcohort-stats/tests/reference_survival.rs.
#
# Writes: aml.csv, lung.csv, ovarian.csv, heart.csv (inputs) and kaplan_meier.json (results).
# Per curve: the survfit table (time, n.risk, n.event, n.censor, surv, std.err of log S = Greenwood),
# log and log-log pointwise intervals, the median and its interval for both transforms, and
# summary(fit, times = ...) (number at risk and survival at chosen times).

source(file.path(dirname(sub("^--file=", "", grep("^--file=", commandArgs(FALSE), value = TRUE))), "common.R"))

lung01 <- data.frame(
  time = lung$time, status = lung$status - 1, sex = lung$sex, age = lung$age,
  ph_ecog = lung$ph.ecog, inst = lung$inst
)
aml01 <- data.frame(time = aml$time, status = aml$status,
                    maintained = as.integer(aml$x == "Maintained"))
ovarian01 <- data.frame(futime = ovarian$futime, fustat = ovarian$fustat, age = ovarian$age,
                        resid_ds = ovarian$resid.ds, rx = ovarian$rx, ecog_ps = ovarian$ecog.ps)
heart01 <- data.frame(start = heart$start, stop = heart$stop, event = heart$event,
                      age = heart$age, year = heart$year, surgery = heart$surgery,
                      transplant = as.integer(as.character(heart$transplant)), id = heart$id)
write_input(aml01, "aml.csv")
write_input(lung01, "lung.csv")
write_input(ovarian01, "ovarian.csv")
write_input(heart01, "heart.csv")

median_of <- function(fit) {
  q <- quantile(fit, probs = 0.5)
  list(median = unname(q$quantile), lower = unname(q$lower), upper = unname(q$upper))
}

# One curve: `make(conf.type)` returns the survfit for that transform. `rows` says how the Rust
# side selects the same rows: input file, exit/event/entry columns and an optional subset.
rows <- function(input, exit, event, entry = NA, subset_column = NA, subset_value = NA) {
  list(input = input, exit = exit, event = event, entry = entry,
       subset_column = subset_column, subset_value = subset_value)
}
curve <- function(label, select, make, level, times) {
  f_log <- make("log")
  f_ll <- make("log-log")
  s_log <- summary(f_log, times = times, extend = TRUE)
  s_ll <- summary(f_ll, times = times, extend = TRUE)
  c(list(label = label, level = level), select, km_table(f_log, f_ll), list(
    median_log = median_of(f_log),
    median_loglog = median_of(f_ll),
    at = list(time = s_log$time, n_risk = s_log$n.risk, surv = s_log$surv,
              std_err_surv = s_log$std.err, lower_log = s_log$lower, upper_log = s_log$upper,
              lower_loglog = s_ll$lower, upper_loglog = s_ll$upper)
  ))
}

curves <- list()
for (g in c(1, 0)) {
  curves[[length(curves) + 1]] <- curve(
    paste0("aml maintained=", g), rows("aml.csv", "time", "status", NA, "maintained", g),
    function(ct) survfit(Surv(time, status) ~ 1, data = subset(aml01, maintained == g),
                         conf.type = ct),
    0.95, c(0, 10, 20, 30, 40, 50, 200))
}
curves[[length(curves) + 1]] <- curve(
  "lung all", rows("lung.csv", "time", "status"), function(ct) survfit(Surv(time, status) ~ 1, data = lung01, conf.type = ct),
  0.95, c(100, 365, 730, 1000))
for (s in c(1, 2)) {
  curves[[length(curves) + 1]] <- curve(
    paste0("lung sex=", s), rows("lung.csv", "time", "status", NA, "sex", s),
    function(ct) survfit(Surv(time, status) ~ 1, data = subset(lung01, sex == s),
                         conf.type = ct, conf.int = 0.90),
    0.90, c(100, 365, 730))
}
for (r in c(1, 2)) {
  curves[[length(curves) + 1]] <- curve(
    paste0("ovarian rx=", r), rows("ovarian.csv", "futime", "fustat", NA, "rx", r),
    function(ct) survfit(Surv(futime, fustat) ~ 1, data = subset(ovarian01, rx == r),
                         conf.type = ct, conf.int = 0.99),
    0.99, c(100, 400, 800))
}
# Counting-process (start, stop] data: late entry into the risk set.
curves[[length(curves) + 1]] <- curve(
  "heart (start, stop]", rows("heart.csv", "stop", "event", "start"),
  function(ct) survfit(Surv(start, stop, event) ~ 1, data = heart01, conf.type = ct),
  0.95, c(0.5, 5, 50, 500, 1500))

write_fixture(list(
  source = provenance(list(call = "survfit(Surv(time, status) ~ 1, conf.type = 'log' | 'log-log'); quantile(fit, 0.5); summary(fit, times, extend = TRUE)")),
  curves = curves
), "kaplan_meier.json")
