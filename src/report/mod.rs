//! One report model, several renderers. Renderers format; none computes.

pub mod allowances;
pub mod csv;
pub mod explain;
pub mod history;
pub mod html;
pub mod model;
pub mod svg;
pub mod table;

pub use model::{AnnualReport, CAUTION, FORMAT_VERSION};

/// The output formats of a report.
#[derive(Clone, Copy, Debug, PartialEq, Eq, clap::ValueEnum)]
pub enum Format {
    Table,
    Json,
    Csv,
    Html,
}

/// Render a report in the chosen format.
pub fn render(
    report: &AnnualReport,
    format: Format,
    out: &mut dyn std::io::Write,
) -> std::io::Result<()> {
    match format {
        Format::Table => out.write_all(table::annual(report).as_bytes()),
        Format::Json => {
            serde_json::to_writer_pretty(&mut *out, report)?;
            out.write_all(b"\n")
        }
        Format::Csv => out.write_all(csv::annual(report).as_bytes()),
        Format::Html => out.write_all(html::annual(report).as_bytes()),
    }
}

/// Render a quarterly report in the chosen format.
pub fn render_quarter(
    report: &model::QuarterReport,
    format: Format,
    out: &mut dyn std::io::Write,
) -> std::io::Result<()> {
    match format {
        Format::Table => out.write_all(table::quarter(report).as_bytes()),
        Format::Json => {
            serde_json::to_writer_pretty(&mut *out, report)?;
            out.write_all(b"\n")
        }
        Format::Csv => out.write_all(csv::quarter(report).as_bytes()),
        Format::Html => out.write_all(html::quarter(report).as_bytes()),
    }
}

/// Render the fleet roll-up: every facility, then the fleet's totals.
pub fn render_fleet(
    report: &model::FleetReport,
    format: Format,
    out: &mut dyn std::io::Write,
) -> std::io::Result<()> {
    match format {
        Format::Table => out.write_all(table::fleet(report).as_bytes()),
        Format::Json => {
            serde_json::to_writer_pretty(&mut *out, report)?;
            out.write_all(b"\n")
        }
        Format::Csv => out.write_all(csv::fleet(report).as_bytes()),
        Format::Html => Err(std::io::Error::other(
            "the HTML report is one facility's document",
        )),
    }
}
