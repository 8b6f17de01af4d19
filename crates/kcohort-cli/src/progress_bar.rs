//! Progress on stderr while tables are read; hidden when stderr is not a terminal.

use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};
use kcohort_ingest::Progress;
use kcohort_model::TableName;
use std::io::IsTerminal;
use std::sync::Mutex;

pub struct TableProgress {
    bar: Mutex<Option<ProgressBar>>,
    visible: bool,
}

impl TableProgress {
    pub fn new() -> TableProgress {
        TableProgress {
            bar: Mutex::new(None),
            visible: std::io::stderr().is_terminal(),
        }
    }
}

impl Progress for TableProgress {
    fn table_started(&self, table: TableName, total: u64) {
        if !self.visible {
            return;
        }
        let bar = ProgressBar::with_draw_target(Some(total), ProgressDrawTarget::stderr());
        bar.set_style(
            ProgressStyle::with_template(
                "{prefix:>18} [{bar:30}] {bytes}/{total_bytes} {bytes_per_sec} {eta}",
            )
            .expect("valid template")
            .progress_chars("=> "),
        );
        bar.set_prefix(table.as_str());
        *self.bar.lock().expect("progress lock") = Some(bar);
    }

    fn advanced(&self, position: u64) {
        if let Some(bar) = self.bar.lock().expect("progress lock").as_ref() {
            bar.set_position(position);
        }
    }

    fn table_finished(&self, _table: TableName) {
        if let Some(bar) = self.bar.lock().expect("progress lock").take() {
            bar.finish_and_clear();
        }
    }
}
