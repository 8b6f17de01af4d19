//! One ingest: read every table of an extract, check every row, write accepted rows and rejects
//! into a new generation of the store, and commit it atomically.

use crate::IngestError;
use crate::context::{AcceptedIds, IdSet, IngestContext};
use crate::extract::{Extract, TableFile, fingerprint};
use crate::parquet_out::{BackgroundPartWriter, PartWriter, WrittenPart};
use crate::rejects::RejectsWriter;
use crate::row_check::Reject;
use crate::source::RowSource;
use crate::store::{self, FailPoint};
use crate::table::{TableRun, rows_for};
use crate::timestamp::{Resolved, SiteClock, SiteZone, format_instant, parse_written};
use chrono::Datelike;
use csv::ByteRecord;
use kcohort_model::manifest::{IngestRecord, StoredFile, StoredTable};
use kcohort_model::store_layout::{rejects_file, table_file};
use kcohort_model::store_schema::stored_schema;
use kcohort_model::{ColumnKind, Manifest, RejectReason, TableName};
use std::collections::BTreeMap;
use std::path::Path;

/// Rows per Arrow batch handed to the Parquet writer.
const BATCH_ROWS: usize = 65_536;
/// Rows read before the id set is sized for the whole file.
const SIZING_SAMPLE_ROWS: u64 = 20_000;

/// How an ingest relates to what the store already holds.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Mode {
    /// The store must be empty (or not exist yet).
    New,
    /// Add the extract; stored rows whose id the extract also has are replaced by its version.
    Append,
    /// Rebuild the store from this extract alone.
    Replace,
}

impl Mode {
    fn as_str(self) -> &'static str {
        match self {
            Mode::New => "new",
            Mode::Append => "append",
            Mode::Replace => "replace",
        }
    }
}

#[derive(Debug, Clone)]
pub struct IngestOptions {
    /// IANA name or fixed offset; zoneless input times are read in it.
    pub site_timezone: String,
    /// The time the data were pulled (contract timestamp form); default: the latest timestamp of
    /// the extract.
    pub extract_end: Option<String>,
    pub mode: Mode,
    /// Test hook: stop the commit at a step.
    pub fail_point: Option<FailPoint>,
}

impl Default for IngestOptions {
    fn default() -> Self {
        IngestOptions {
            site_timezone: "UTC".into(),
            extract_end: None,
            mode: Mode::New,
            fail_point: None,
        }
    }
}

/// Progress of the row pass, reported per table in bytes (CSV) or rows (Parquet).
pub trait Progress {
    fn table_started(&self, _table: TableName, _total: u64) {}
    fn advanced(&self, _position: u64) {}
    fn table_finished(&self, _table: TableName) {}
}

/// A progress sink that ignores everything.
pub struct NoProgress;
impl Progress for NoProgress {}

/// What an ingest did.
#[derive(Debug, Clone)]
pub struct IngestOutcome {
    /// The inputs were already ingested with the same settings: the store was left as it was.
    pub unchanged: bool,
    /// The store's manifest after the ingest.
    pub manifest: Manifest,
    /// This run's record (for an unchanged run: the earlier record of the same inputs).
    pub record: IngestRecord,
}

pub fn ingest(
    extract_dir: &Path,
    store_dir: &Path,
    options: &IngestOptions,
    progress: &dyn Progress,
) -> Result<IngestOutcome, IngestError> {
    let zone = SiteZone::parse(&options.site_timezone)
        .map_err(|m| IngestError::BadOption(format!("--site-timezone: {m}")))?;
    let given_end = match &options.extract_end {
        Some(text) => Some(parse_extract_end(text, zone)?),
        None => None,
    };
    let extract = Extract::discover(extract_dir)?;
    let inputs = extract.hash_inputs()?;
    let input_fingerprint = fingerprint(&inputs);
    let previous = store::read_manifest(store_dir)?;

    if let Some(m) = &previous {
        let same_settings = m.site_timezone == zone.name()
            && given_end
                .map(format_instant)
                .is_none_or(|e| e == m.extract_end);
        if let Some(last) = m.ingests.last()
            && last.input_fingerprint == input_fingerprint
            && same_settings
        {
            // Nothing to write; still finish the cleanup an interrupted earlier write may have left.
            store::remove_unlisted(store_dir, m)?;
            return Ok(IngestOutcome {
                unchanged: true,
                manifest: m.clone(),
                record: last.clone(),
            });
        }
        match options.mode {
            Mode::New if !m.ingests.is_empty() => {
                return Err(IngestError::store(
                    store_dir,
                    "already holds an extract\nhint: pass --append to add a newer extract, or --replace to rebuild the store from this one",
                ));
            }
            Mode::Append if m.site_timezone != zone.name() => {
                return Err(IngestError::BadOption(format!(
                    "--site-timezone {} differs from the store's {}\nhint: pass --site-timezone {} to append, or --replace to rebuild",
                    zone.name(),
                    m.site_timezone,
                    m.site_timezone
                )));
            }
            _ => {}
        }
    }
    let base = match options.mode {
        Mode::Append => previous.clone(),
        Mode::New | Mode::Replace => None,
    };

    let (extract_end, end_source) = match given_end {
        Some(e) => (e, "given"),
        None => (scan_latest_time(&extract, zone)?.ok_or_else(|| {
            IngestError::BadOption("the extract has no valid timestamp to take the extract end from\nhint: pass --extract-end".into())
        })?, "latest_timestamp"),
    };
    let extract_year = chrono::DateTime::from_timestamp_micros(extract_end)
        .map(|t| match zone {
            SiteZone::Named(tz) => t.with_timezone(&tz).year(),
            SiteZone::Fixed(off) => t.with_timezone(&off).year(),
        })
        .expect("extract end in range");

    let generation = previous.as_ref().map_or(1, |m| m.generation + 1);
    let seq = base
        .as_ref()
        .and_then(|m| m.ingests.last())
        .map_or(1, |r| r.seq + 1);
    std::fs::create_dir_all(store_dir).map_err(|e| IngestError::io(store_dir, e))?;

    let mut ctx = IngestContext {
        clock: SiteClock::new(zone),
        extract_end,
        extract_year,
        patients: IdSet::default(),
        encounters: IdSet::default(),
        ambiguous_local_times: 0,
    };
    if let Some(m) = &base {
        load_ids(store_dir, m, TableName::Patients, &mut ctx.patients)?;
        load_ids(store_dir, m, TableName::Encounters, &mut ctx.encounters)?;
    }

    let mut parts: Vec<WrittenPart> = Vec::new();
    let mut rejects = RejectsWriter::create(store_dir, &rejects_file(generation, 0), seq)?;
    let mut record_tables = BTreeMap::new();
    let mut stored_tables = BTreeMap::new();
    for table in TableName::ALL {
        let file = extract.tables.iter().find(|f| f.table == table);
        let old = base.as_ref().and_then(|m| m.tables.get(table.as_str()));
        let mut stored = StoredTable::default();
        let mut run = TableRun::default();
        if let Some(file) = file {
            let part = read_table(
                file,
                store_dir,
                generation,
                &mut ctx,
                &mut run,
                &mut rejects,
                progress,
            )?;
            push_part(&mut stored, &part);
            parts.push(part);
        }
        if let Some(old) = old {
            let replaced = carry_over(
                store_dir,
                table,
                old,
                &run.accepted_ids,
                generation,
                &mut stored,
                &mut parts,
            )?;
            run.counts.rows_replaced = replaced;
        }
        stored.rows = stored.files.iter().map(|f| f.rows).sum();
        if file.is_some() {
            record_tables.insert(table.as_str().to_string(), run.counts);
        }
        if file.is_some() || old.is_some() {
            stored_tables.insert(table.as_str().to_string(), stored);
        }
    }
    let rejects_part = rejects.finish()?;
    let mut all_rejects = base.as_ref().map(|m| m.rejects.clone()).unwrap_or_default();
    push_part(&mut all_rejects, &rejects_part);
    all_rejects.rows = all_rejects.files.iter().map(|f| f.rows).sum();
    parts.push(rejects_part);

    let record = IngestRecord {
        seq,
        mode: options.mode.as_str().to_string(),
        extract_name: extract.name(),
        input_fingerprint,
        inputs,
        ignored_files: extract.ignored.clone(),
        tables: record_tables,
    };
    let mut ingests = base.as_ref().map(|m| m.ingests.clone()).unwrap_or_default();
    ingests.push(record.clone());
    let manifest_end = match &base {
        Some(m) if m.extract_end > format_instant(extract_end) => m.extract_end.clone(),
        _ => format_instant(extract_end),
    };
    let manifest = Manifest {
        format_version: kcohort_model::manifest::FORMAT_VERSION,
        tool_version: env!("CARGO_PKG_VERSION").to_string(),
        generation,
        site_timezone: zone.name(),
        extract_end: manifest_end,
        extract_end_source: end_source.to_string(),
        ingests,
        tables: stored_tables,
        rejects: all_rejects,
        derived: BTreeMap::new(),
    };
    store::commit(store_dir, &parts, &manifest, options.fail_point)?;
    Ok(IngestOutcome {
        unchanged: false,
        manifest,
        record,
    })
}

fn push_part(table: &mut StoredTable, part: &WrittenPart) {
    table.files.push(StoredFile {
        path: part.relative.clone(),
        rows: part.rows,
        bytes: part.bytes,
        sha256: part.sha256.clone(),
    });
}

fn parse_extract_end(text: &str, zone: SiteZone) -> Result<i64, IngestError> {
    let bad = || {
        IngestError::BadOption(format!(
            "--extract-end: expected a timestamp like {}, found `{text}`",
            crate::timestamp::TIMESTAMP_FORMS
        ))
    };
    let written = parse_written(text.trim().as_bytes()).ok_or_else(bad)?;
    match SiteClock::new(zone).resolve(written) {
        Resolved::Exact(us) | Resolved::Earlier(us) => Ok(us),
        Resolved::Nonexistent => Err(IngestError::BadOption(format!(
            "--extract-end `{text}` does not exist in time zone {} (daylight-saving gap)",
            zone.name()
        ))),
    }
}

/// Read one input table: every row is accepted into the table's part or written to the rejects.
fn read_table(
    file: &TableFile,
    store_dir: &Path,
    generation: u64,
    ctx: &mut IngestContext,
    run: &mut TableRun,
    rejects: &mut RejectsWriter,
    progress: &dyn Progress,
) -> Result<WrittenPart, IngestError> {
    let table = file.table;
    let (mut source, map, facts) = RowSource::open(file)?;
    run.counts.had_bom = facts.had_bom;
    run.counts.ignored_columns = facts.ignored_columns;
    let total = match &source {
        RowSource::Csv(_) => std::fs::metadata(&file.path).map(|m| m.len()).unwrap_or(0),
        RowSource::Parquet(_) => 0,
    };
    progress.table_started(table, total);
    let mut writer = BackgroundPartWriter::create(
        store_dir,
        &table_file(table, generation, 0),
        stored_schema(table),
    )?;
    let mut rows = rows_for(table);
    let mut by_reason = [0u64; RejectReason::ALL.len()];
    let mut record = ByteRecord::new();
    let width = table.columns().len();
    let ambiguous_before = ctx.ambiguous_local_times;
    loop {
        let line = match source.next_row(&mut record) {
            Ok(Some(line)) => line,
            Ok(None) => break,
            Err(IngestError::Csv { message, .. }) => {
                return Err(IngestError::Csv {
                    file: file.file_name.clone(),
                    message,
                });
            }
            Err(e) => return Err(e),
        };
        run.counts.rows_read += 1;
        if run.counts.rows_read == SIZING_SAMPLE_ROWS && total > 0 {
            // Size the id set once for the whole file (estimated from the bytes per row so far):
            // growing a set of millions of ids step by step costs more time and, at the last
            // step, twice the memory.
            let per_row = source.bytes_read().max(1) as f64 / SIZING_SAMPLE_ROWS as f64;
            let expected = (total as f64 / per_row * 1.05) as usize;
            run.accepted_ids
                .reserve(expected.saturating_sub(run.accepted_ids.len()));
            match table {
                TableName::Patients => ctx.patients.reserve(expected),
                TableName::Encounters => ctx.encounters.reserve(expected),
                _ => {}
            }
        }
        let verdict = check_record(&record, &map.file_index, map.file_width, width, |fields| {
            rows.accept(fields, ctx, run)
        });
        match verdict {
            Ok(()) => {
                run.counts.rows_accepted += 1;
                if rows.pending() >= BATCH_ROWS {
                    writer.write(rows.take_batch())?;
                    progress.advanced(source.bytes_read());
                }
            }
            Err(reject) => {
                run.counts.rows_rejected += 1;
                by_reason[reason_index(reject.reason)] += 1;
                rejects.push(table.as_str(), &file.file_name, line, &reject)?;
            }
        }
    }
    if rows.pending() > 0 {
        writer.write(rows.take_batch())?;
    }
    run.counts.crlf_lines = source.crlf_lines();
    run.counts.ambiguous_local_times = ctx.ambiguous_local_times - ambiguous_before;
    for (reason, n) in RejectReason::ALL.iter().zip(by_reason) {
        if n > 0 {
            run.counts
                .rejected_by_reason
                .insert(reason.code().to_string(), n);
        }
    }
    progress.table_finished(table);
    writer.finish()
}

fn reason_index(reason: RejectReason) -> usize {
    RejectReason::ALL
        .iter()
        .position(|r| *r == reason)
        .expect("listed")
}

/// The row-level rules that come before any column is read: valid UTF-8 and the field count.
fn check_record(
    record: &ByteRecord,
    file_index: &[Option<usize>],
    file_width: usize,
    width: usize,
    accept: impl FnOnce(&[&str]) -> Result<(), Reject>,
) -> Result<(), Reject> {
    let mut fields = [""; 16];
    let mut bad_utf8 = None;
    for (slot, index) in fields.iter_mut().zip(file_index) {
        if let Some(i) = index {
            match std::str::from_utf8(record.get(*i).unwrap_or_default()) {
                Ok(s) => *slot = s,
                Err(_) => {
                    bad_utf8.get_or_insert(*i);
                }
            }
        }
    }
    if let Some(i) = bad_utf8 {
        return Err(Reject {
            reason: RejectReason::InvalidUtf8,
            column: None,
            message: format!("field {} is not valid UTF-8; save the file as UTF-8", i + 1),
            value: None,
        });
    }
    if record.len() != file_width {
        return Err(Reject {
            reason: RejectReason::ColumnCount,
            column: None,
            message: format!(
                "expected {file_width} fields as in the header, found {}",
                record.len()
            ),
            value: None,
        });
    }
    accept(&fields[..width])
}

/// Keep the stored parts of `table` that the extract does not touch; copy those holding replaced
/// ids without them. Returns the number of stored rows replaced.
fn carry_over(
    root: &Path,
    table: TableName,
    old: &StoredTable,
    accepted: &AcceptedIds,
    generation: u64,
    stored: &mut StoredTable,
    parts: &mut Vec<WrittenPart>,
) -> Result<u64, IngestError> {
    let Some(id_column) = table.id_column() else {
        stored.files.extend(old.files.iter().cloned());
        return Ok(0);
    };
    let mut replaced = 0u64;
    let mut next_part = 1;
    for file in &old.files {
        let mut hits = 0u64;
        if !accepted.is_empty() {
            store::for_each_id(root, file, id_column, |id| {
                if accepted.contains(id) {
                    hits += 1;
                }
            })?;
        }
        if hits == 0 {
            stored.files.push(file.clone());
            continue;
        }
        let mut out = PartWriter::create(
            root,
            &table_file(table, generation, next_part),
            stored_schema(table),
        )?;
        next_part += 1;
        replaced += store::copy_without(root, file, id_column, accepted, &mut out)?;
        let part = out.finish()?;
        push_part(stored, &part);
        parts.push(part);
    }
    Ok(replaced)
}

fn load_ids(
    root: &Path,
    manifest: &Manifest,
    table: TableName,
    into: &mut IdSet,
) -> Result<(), IngestError> {
    let (Some(stored), Some(column)) = (manifest.tables.get(table.as_str()), table.id_column())
    else {
        return Ok(());
    };
    into.reserve(stored.rows as usize);
    for file in &stored.files {
        store::for_each_id(root, file, column, |id| {
            into.insert_hash(IdSet::hash(id));
        })?;
    }
    Ok(())
}

/// The default extract end: the latest well-formed timestamp in any time column of the extract.
fn scan_latest_time(extract: &Extract, zone: SiteZone) -> Result<Option<i64>, IngestError> {
    let mut clock = SiteClock::new(zone);
    let mut latest: Option<i64> = None;
    let mut record = ByteRecord::new();
    for file in &extract.tables {
        let (mut source, map, _) = RowSource::open(file)?;
        let time_columns: Vec<usize> = file
            .table
            .columns()
            .iter()
            .zip(&map.file_index)
            .filter(|(c, _)| matches!(c.kind, ColumnKind::Timestamp(_)))
            .filter_map(|(_, i)| *i)
            .collect();
        loop {
            match source.next_row(&mut record) {
                Ok(Some(_)) => {}
                Ok(None) => break,
                Err(IngestError::Csv { message, .. }) => {
                    return Err(IngestError::Csv {
                        file: file.file_name.clone(),
                        message,
                    });
                }
                Err(e) => return Err(e),
            }
            for &i in &time_columns {
                let Some(field) = record.get(i) else { continue };
                let field = field.trim_ascii();
                let Some(written) = parse_written(field) else {
                    continue;
                };
                if let Resolved::Exact(us) | Resolved::Earlier(us) = clock.resolve(written)
                    && us >= crate::timestamp::EARLIEST_MICROS
                    && latest.is_none_or(|l| us > l)
                {
                    latest = Some(us);
                }
            }
        }
    }
    Ok(latest)
}
