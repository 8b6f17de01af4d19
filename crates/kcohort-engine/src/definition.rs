//! The SQL definitions in `queries/`, compiled into the binary, and how one is run.
//!
//! A definition file holds `CREATE VIEW` statements (its helper steps) and ends with one query,
//! whose result is the derived table named like the file. Nothing else is allowed in a file (no
//! `COPY`, `INSERT`, `SET`, `CREATE TABLE`): the engine, not the SQL, decides what is written.
//! Definitions run in the order of [`DEFINITIONS`], in one session, so a later file may read an
//! earlier file's views and derived table.

use crate::EngineError;
use crate::parameter::Parameters;
use datafusion::dataframe::DataFrame;
use datafusion::execution::context::SQLOptions;
use datafusion::prelude::SessionContext;
use datafusion::sql::parser::{DFParser, Statement};
use datafusion::sql::sqlparser::ast::Statement as SqlStatement;

/// One definition: a derived table and the SQL that makes it.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Definition {
    /// Name of the derived table (the file name without `.sql`).
    pub table: &'static str,
    /// File name inside `queries/`.
    pub file: &'static str,
    /// The file's text.
    pub sql: &'static str,
    /// DataFusion settings for this definition's query only (key, value).
    pub settings: &'static [(&'static str, &'static str)],
}

/// The episode machine's window has no PARTITION BY (one ordered pass): after it, DataFusion's
/// round-robin repartition copies every row's struct output once more to feed two partitions,
/// which cost more than the rest of the episode query (5.8 s → 3.1 s without it on 5.3 M
/// potassium results, BENCHMARKS.md). Other definitions keep the default: their scans gain
/// from it (exposure_eras ran 25 s → 31 s with it off everywhere).
const ROUND_ROBIN_OFF: &[(&str, &str)] = &[(
    "datafusion.optimizer.enable_round_robin_repartition",
    "false",
)];

/// Every definition, in the order they run.
pub const DEFINITIONS: &[Definition] = &[
    Definition {
        table: "episodes",
        file: "episodes.sql",
        sql: include_str!("../../../queries/episodes.sql"),
        settings: ROUND_ROBIN_OFF,
    },
    Definition {
        table: "potassium_quality",
        file: "potassium_quality.sql",
        sql: include_str!("../../../queries/potassium_quality.sql"),
        settings: &[],
    },
    Definition {
        table: "exposure_eras",
        file: "exposure_eras.sql",
        sql: include_str!("../../../queries/exposure_eras.sql"),
        settings: &[],
    },
    Definition {
        table: "kidney_function",
        file: "kidney_function.sql",
        sql: include_str!("../../../queries/kidney_function.sql"),
        settings: &[],
    },
    Definition {
        table: "lab_conditions",
        file: "lab_conditions.sql",
        sql: include_str!("../../../queries/lab_conditions.sql"),
        settings: &[],
    },
    Definition {
        table: "episode_kidney",
        file: "episode_kidney.sql",
        sql: include_str!("../../../queries/episode_kidney.sql"),
        settings: &[],
    },
    Definition {
        table: "episode_causes",
        file: "episode_causes.sql",
        sql: include_str!("../../../queries/episode_causes.sql"),
        settings: &[],
    },
    Definition {
        table: "episode_cause_summary",
        file: "episode_cause_summary.sql",
        sql: include_str!("../../../queries/episode_cause_summary.sql"),
        settings: &[],
    },
    Definition {
        table: "episode_treatments",
        file: "episode_treatments.sql",
        sql: include_str!("../../../queries/episode_treatments.sql"),
        settings: &[],
    },
    Definition {
        table: "episode_outcomes",
        file: "episode_outcomes.sql",
        sql: include_str!("../../../queries/episode_outcomes.sql"),
        settings: &[],
    },
    Definition {
        table: "drug_event_listing",
        file: "drug_event_listing.sql",
        sql: include_str!("../../../queries/drug_event_listing.sql"),
        settings: &[],
    },
    Definition {
        table: "unit_months",
        file: "unit_months.sql",
        sql: include_str!("../../../queries/unit_months.sql"),
        settings: &[],
    },
    Definition {
        table: "episode_register",
        file: "episode_register.sql",
        sql: include_str!("../../../queries/episode_register.sql"),
        settings: &[],
    },
    Definition {
        table: "new_user_cohorts",
        file: "new_user_cohorts.sql",
        sql: include_str!("../../../queries/new_user_cohorts.sql"),
        settings: &[],
    },
];

fn query_error(definition: &str, e: datafusion::error::DataFusionError) -> EngineError {
    EngineError::Query {
        definition: definition.to_string(),
        source: Box::new(e),
    }
}

/// Bind the parameters, create the definition's views, and return its final query as a
/// DataFrame (not yet run).
pub async fn plan_definition(
    ctx: &SessionContext,
    definition: &Definition,
    parameters: &Parameters,
) -> Result<DataFrame, EngineError> {
    let name = definition.file;
    let sql = parameters.bind(name, definition.sql)?;
    let statements = DFParser::parse_sql(&sql).map_err(|e| query_error(name, e))?;
    let n = statements.len();
    let options = SQLOptions::new()
        .with_allow_ddl(true)
        .with_allow_dml(false)
        .with_allow_statements(false);
    let mut query = None;
    for (i, statement) in statements.into_iter().enumerate() {
        let last = i + 1 == n;
        let allowed = match &statement {
            Statement::Statement(s) => match s.as_ref() {
                SqlStatement::CreateView(_) => !last,
                SqlStatement::Query(_) => last,
                _ => false,
            },
            _ => false,
        };
        if !allowed {
            return Err(EngineError::Definition {
                definition: name.to_string(),
                message: format!(
                    "statement {} is not allowed here: a definition is CREATE VIEW statements \
                     followed by one query",
                    i + 1
                ),
            });
        }
        let plan = ctx
            .state()
            .statement_to_plan(statement)
            .await
            .map_err(|e| query_error(name, e))?;
        options
            .verify_plan(&plan)
            .map_err(|e| query_error(name, e))?;
        if last {
            // The query runs later, with the session state it is given here.
            let mut state = ctx.state();
            for (key, value) in definition.settings {
                state
                    .config_mut()
                    .options_mut()
                    .set(key, value)
                    .map_err(|e| query_error(name, e))?;
            }
            query = Some(DataFrame::new(state, plan));
        } else {
            ctx.execute_logical_plan(plan)
                .await
                .map_err(|e| query_error(name, e))?;
        }
    }
    query.ok_or_else(|| EngineError::Definition {
        definition: name.to_string(),
        message: "the file has no query".into(),
    })
}

/// One token of a definition, with its line.
#[derive(Debug, Clone, PartialEq)]
struct Token {
    text: String,
    line: usize,
}

/// Split SQL into lowercase tokens (words, numbers, `$names`, string literals, punctuation and
/// operators), leaving out comments.
fn tokens(sql: &str) -> Vec<Token> {
    let chars: Vec<char> = sql.chars().collect();
    let mut out = Vec::new();
    let (mut i, mut line) = (0, 1);
    while i < chars.len() {
        let c = chars[i];
        let start_line = line;
        let mut push = |text: String| {
            out.push(Token {
                text,
                line: start_line,
            })
        };
        if c == '\n' {
            line += 1;
            i += 1;
        } else if c.is_whitespace() {
            i += 1;
        } else if c == '-' && chars.get(i + 1) == Some(&'-') {
            while i < chars.len() && chars[i] != '\n' {
                i += 1;
            }
        } else if c == '/' && chars.get(i + 1) == Some(&'*') {
            i += 2;
            while i < chars.len() && !(chars[i] == '*' && chars.get(i + 1) == Some(&'/')) {
                line += usize::from(chars[i] == '\n');
                i += 1;
            }
            i += 2;
        } else if c == '\'' || c == '"' {
            let mut j = i + 1;
            while j < chars.len() && chars[j] != c {
                line += usize::from(chars[j] == '\n');
                j += 1;
            }
            push(
                chars[i..(j + 1).min(chars.len())]
                    .iter()
                    .collect::<String>()
                    .to_lowercase(),
            );
            i = j + 1;
        } else if c.is_alphanumeric() || c == '_' || c == '$' || c == '.' {
            let mut j = i + 1;
            while j < chars.len()
                && (chars[j].is_alphanumeric() || chars[j] == '_' || chars[j] == '.')
            {
                j += 1;
            }
            push(chars[i..j].iter().collect::<String>().to_lowercase());
            i = j;
        } else {
            let two: String = chars[i..(i + 2).min(chars.len())].iter().collect();
            if ["<=", ">=", "<>", "!=", "||", "::"].contains(&two.as_str()) {
                push(two);
                i += 2;
            } else {
                push(c.to_string());
                i += 1;
            }
        }
    }
    out
}

const COMPARISONS: &[&str] = &["<", "<=", ">", ">=", "=", "<>", "!=", "between"];
const LEFT_STOPS: &[&str] = &[
    "and", "or", "not", "when", "then", "else", "where", "on", "select", "case", "having", ",",
];
const RIGHT_STOPS: &[&str] = &[
    "and", "or", "when", "then", "else", "end", "as", "from", "where", "group", "order", ",",
];

/// The operand left of token `i`: back to a keyword, comma or unmatched `(`.
fn left_operand(t: &[Token], i: usize) -> &[Token] {
    let mut depth = 0usize;
    let mut j = i;
    while j > 0 {
        let text = t[j - 1].text.as_str();
        match text {
            ")" => depth += 1,
            "(" if depth == 0 => break,
            "(" => depth -= 1,
            _ if depth == 0 && LEFT_STOPS.contains(&text) => break,
            _ => {}
        }
        j -= 1;
    }
    &t[j..i]
}

/// The operand right of token `i`: up to a keyword, comma or unmatched `)` (for `BETWEEN`, both
/// bounds).
fn right_operand(t: &[Token], i: usize) -> &[Token] {
    let mut depth = 0usize;
    let mut j = i + 1;
    let mut ands_allowed = usize::from(t[i].text == "between");
    while j < t.len() {
        let text = t[j].text.as_str();
        match text {
            "(" => depth += 1,
            ")" if depth == 0 => break,
            ")" => depth -= 1,
            "and" if depth == 0 && ands_allowed > 0 => ands_allowed -= 1,
            _ if depth == 0 && RIGHT_STOPS.contains(&text) => break,
            _ => {}
        }
        j += 1;
    }
    &t[i + 1..j]
}

/// A binary minus: `-` after an operand (a word, number, literal or `)`).
fn has_subtraction(operand: &[Token]) -> bool {
    operand.windows(2).any(|w| {
        w[1].text == "-"
            && (w[0].text == ")"
                || w[0]
                    .text
                    .starts_with(|c: char| c.is_alphanumeric() || c == '_' || c == '\''))
    })
}

/// An interval literal or a `$..._hours` / `$..._days` window parameter.
fn has_window(operand: &[Token]) -> bool {
    operand.iter().enumerate().any(|(k, tok)| {
        tok.text == "interval"
            || (tok.text.starts_with('$')
                && (tok.text.ends_with("_hours") || tok.text.ends_with("_days")))
            || (k > 0 && operand[k - 1].text == "interval")
    })
}

/// Find time windows written as a difference compared with an interval or a window parameter
/// (`(b.t - a.t) > INTERVAL '2 days'`, `b.t - a.t <= $rebound_hours`), which DataFusion 55
/// compares field by field and gets wrong when the interval has a day or month part
/// (ECOSYSTEM.md §3), and interval literals with a day, week, month or year part (windows are
/// written in hours). Returns the 1-based line numbers of the offending comparisons.
pub fn lint_time_windows(sql: &str) -> Vec<usize> {
    let t = tokens(sql);
    let mut bad = Vec::new();
    for (i, tok) in t.iter().enumerate() {
        if COMPARISONS.contains(&tok.text.as_str()) {
            let (left, right) = (left_operand(&t, i), right_operand(&t, i));
            if (has_subtraction(left) && has_window(right))
                || (has_subtraction(right) && has_window(left))
            {
                bad.push(tok.line);
            }
        }
        if i > 0 && t[i - 1].text == "interval" && tok.text.starts_with('\'') {
            let calendar = ["day", "week", "mon", "year", "decade", "centur", "millenn"];
            if calendar.iter().any(|u| tok.text.contains(u)) {
                bad.push(tok.line);
            }
        }
    }
    bad.dedup();
    bad
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::path::PathBuf;

    fn queries_dir() -> PathBuf {
        PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../../queries")
    }

    #[test]
    fn every_file_in_queries_is_a_definition_and_the_same_text() {
        let mut files: Vec<String> = std::fs::read_dir(queries_dir())
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .filter(|f| f.ends_with(".sql"))
            .collect();
        files.sort();
        let mut listed: Vec<String> = DEFINITIONS.iter().map(|d| d.file.to_string()).collect();
        listed.sort();
        assert_eq!(files, listed, "queries/*.sql and DEFINITIONS differ");
        for d in DEFINITIONS {
            assert_eq!(format!("{}.sql", d.table), d.file);
        }
    }

    #[test]
    fn lint_catches_differences_compared_with_windows() {
        for bad in [
            "WHERE (b.t - a.t) > INTERVAL '30 days'",
            "WHERE b.t - a.t <= $rebound_hours",
            "AND (r.collected_at - e.onset_at) >= INTERVAL '48 hours'",
            "CASE WHEN INTERVAL '6 hours' < b.t - a.t THEN 1 END",
            "WHERE b.t - a.t BETWEEN INTERVAL '0 hours' AND $spurious_repeat_hours",
            "WHERE extract(epoch FROM b.t) - 3600 > $rebound_hours",
            "WHERE b.t > a.t + INTERVAL '2 days'",
            "WHERE b.t > a.t + INTERVAL '1 month'",
        ] {
            assert_eq!(lint_time_windows(bad), vec![1], "not caught: {bad}");
        }
        for good in [
            "WHERE b.t > a.t + INTERVAL '48 hours'",
            "WHERE b.t > a.t + $max_gap_hours",
            "AND onset_at < LAG(end_at) OVER runs + $rebound_hours THEN 0",
            "CAST(MAX(last_seq) - MIN(first_seq) + 1 AS BIGINT) AS n_results",
            "-- (b.t - a.t) > INTERVAL '1 day' is the wrong form",
            "WHERE value - 1 > 4",
            "WHERE extract(epoch FROM b.t) - extract(epoch FROM a.t) > 3600",
            "ON t.start_at >= e.onset_at AND t.start_at <= e.end_at + $spurious_repeat_hours",
        ] {
            assert!(lint_time_windows(good).is_empty(), "false alarm: {good}");
        }
    }

    #[test]
    fn every_definition_writes_windows_in_the_safe_form() {
        for d in DEFINITIONS {
            let bad = lint_time_windows(d.sql);
            assert!(
                bad.is_empty(),
                "{} lines {bad:?}: write windows as `later > earlier + $window`",
                d.file
            );
        }
    }
}
