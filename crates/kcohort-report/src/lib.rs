//! The monthly quality report of kcohort: from the month's numbers (read from the store by the
//! CLI) to statistics, small-cell suppression, a self-contained HTML page with inline SVG
//! charts, flat tables and a machine-readable JSON. Pure: no files, no clocks, no DataFusion.
//!
//! - [`input`]: what a report is made from.
//! - [`monthly`]: the numbers (rates, u-charts, funnel, shares, indicators).
//! - [`suppression`]: small-cell and complementary suppression.
//! - [`svg`]: the chart primitives; [`html`]: the page; [`tables`]: the flat tables.
//! - [`compare_page`]: the page of a two-arm new-user comparison; [`cause_table`]: risk ratios
//!   by cause category (page and CSV); [`ratio_axis`]: the log axis and interval marks they share.

pub mod cause_table;
pub mod compare_page;
pub mod html;
pub mod input;
pub mod listing_page;
pub mod monthly;
mod page;
pub mod ratio_axis;
pub mod suppression;
pub mod svg;
pub mod tables;

pub use input::ReportInput;
pub use monthly::{Report, ReportOptions, build_report};
pub use suppression::{Count, Suppression};
