//! Rendering results for people (terminal tables) and for programs (JSON, CSV).
//!
//! JSON and CSV are SI with the unit in every key (`flow_m3_per_s`); these names are a
//! stable interface for scripts. Tables use the units designers read: mbar, µL/min, mm/s.

mod csv;
mod design;
mod html;
mod json;
mod section;
pub mod text;

pub use csv::to_csv;
pub use design::{sensitivity_report, size_report, tune_report};
pub use html::html_page;
pub use json::to_json;
pub use section::section_report;
pub use text::{check_text, to_table};

use crate::analysis::SteadyState;
use crate::network::{Network, Port};

/// Output formats of the solve report.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Format {
    Table,
    Json,
    Csv,
}

/// The caution printed with every human-readable result.
pub const CAUTION: &str =
    "Caution: these are model predictions (rigid channels, fully developed laminar \
flow, Newtonian fluid). Real chips deform, delaminate or leak, and tubing and fittings fail under \
pressure. Validate with your own device, and follow your lab's safety rules.";

/// Format a number with about `sig` significant digits, switching to exponent form for very
/// large or small magnitudes.
pub fn fmt_sig(x: f64, sig: usize) -> String {
    if x == 0.0 {
        return "0".to_string();
    }
    if !x.is_finite() {
        return format!("{x}");
    }
    let mag = x.abs().log10().floor() as i32;
    if !(-3..6).contains(&mag) {
        return format!("{:.*e}", sig.saturating_sub(1), x);
    }
    let decimals = (sig as i32 - 1 - mag).max(0) as usize;
    format!("{x:.decimals$}")
}

pub(crate) fn role(port: Port) -> &'static str {
    match port {
        Port::Junction => "junction",
        Port::Pressure(_) => "pressure",
        Port::Flow(_) => "flow",
    }
}

/// Render in the chosen format.
pub fn render(network: &Network, state: &SteadyState, format: Format) -> String {
    match format {
        Format::Table => to_table(network, state),
        Format::Json => to_json(network, state),
        Format::Csv => to_csv(network, state),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn significant_digits() {
        assert_eq!(fmt_sig(123.456, 4), "123.5");
        assert_eq!(fmt_sig(0.012345, 3), "0.0123");
        assert_eq!(fmt_sig(1.5e13, 3), "1.50e13");
        assert_eq!(fmt_sig(0.0, 3), "0");
        assert_eq!(fmt_sig(-2.0, 3), "-2.00");
    }

    #[test]
    fn csv_quotes_when_needed() {
        assert_eq!(csv::csv_field("a,b"), "\"a,b\"");
        assert_eq!(csv::csv_field("plain"), "plain");
    }
}
