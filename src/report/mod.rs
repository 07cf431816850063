//! Rendering results for people (terminal tables) and for programs (JSON, CSV).
//!
//! JSON and CSV are SI with the unit in every key (`flow_m3_per_s`); these names are a
//! stable interface for scripts. Tables use the units designers read: mbar, µL/min, mm/s.

mod csv;
mod design;
mod evolve;
pub mod findings;
pub mod folder;
mod html;
mod json;
mod section;
mod solutes;
mod spread;
pub mod text;

pub use csv::to_csv;
pub use design::{sensitivity_report, size_report, tune_report};
pub use findings::{finding_text, note_text};
pub use html::{html_page, utc_date, Made};
pub use json::{to_json, JsonLayout, SCHEMA_VERSION};
pub use section::section_report;
pub use text::{check_text, to_table};

use crate::network::Port;
pub use crate::outcome::Format;
use crate::outcome::Outcome;
use std::io::{self, Write};

/// The caution printed with every human-readable result.
pub const CAUTION: &str =
    "Caution: these are model predictions (rigid channels, fully developed laminar \
flow, Newtonian fluid). Real chips deform, delaminate or leak, and tubing and fittings fail under \
pressure. Validate with your own device, and follow your lab's safety rules.";

pub use crate::units::display::fmt_sig;

/// `x` rounded to 10 significant digits: the key tables sort and pick by, so that values equal
/// but for rounding (two symmetric chambers, two equal pumps) tie and keep the file's order,
/// whichever way the solver's last bits fall.
pub(crate) fn tie_key(x: f64) -> f64 {
    if x == 0.0 || !x.is_finite() {
        return x;
    }
    format!("{x:.9e}").parse().unwrap_or(x)
}

/// Which way a channel's flow runs, for a table: "a → b", "b → a", or "a ─ b (no flow)".
pub(crate) fn flow_direction(a: &str, b: &str, flow: f64) -> String {
    if flow == 0.0 {
        format!("{a} ─ {b} (no flow)")
    } else if flow > 0.0 {
        format!("{a} → {b}")
    } else {
        format!("{b} → {a}")
    }
}

pub(crate) fn role(port: Port) -> &'static str {
    match port {
        Port::Junction => "junction",
        Port::Pressure(_) => "pressure",
        Port::Flow(_) => "flow",
    }
}

/// The tables of a tuned or sized chip, as `solve` prints them.
fn operating_point_table(after: &crate::outcome::Changed, w: &mut dyn Write) -> io::Result<()> {
    w.write_all(
        b"\nOperating point of the changed chip (the copy as written, read back and solved)\n\n",
    )?;
    w.write_all(to_table(&after.chip, &after.state).as_bytes())
}

/// [`render`] with JSON laid out as `layout` (tables and CSV are the same either way). A
/// solve or check document is serialised compact directly; the other documents pass through
/// [`json::Minify`].
pub fn render_with(
    outcome: &Outcome,
    format: Format,
    layout: JsonLayout,
    w: &mut dyn Write,
) -> io::Result<()> {
    if format != Format::Json || layout == JsonLayout::Pretty {
        return render(outcome, format, w);
    }
    match outcome {
        Outcome::Solved {
            chip,
            state,
            sensitivities,
        } => {
            let mut doc = json::solve_report(chip, state);
            doc.sensitivities = sensitivities
                .as_ref()
                .map(|t| json::sensitivity_json(&chip.network, t));
            json::write_json_as(&doc, layout, w)
        }
        Outcome::Checked {
            chip,
            state,
            passed,
        } => {
            let mut doc = json::solve_report(chip, state);
            doc.verdict = Some(if *passed { "pass" } else { "fail" });
            json::write_json_as(&doc, layout, w)
        }
        Outcome::Wrote(_) => Ok(()),
        other => {
            let mut m = json::Minify::new(w);
            render(other, format, &mut m)?;
            m.flush()?;
            drop(m);
            w.write_all(b"\n")
        }
    }
}

/// Render a command's outcome in `format` to `w`. An outcome that has nothing to print
/// (files written) writes nothing; a format the outcome cannot take is an
/// `InvalidInput` error (callers check [`Outcome::formats`] first).
pub fn render(outcome: &Outcome, format: Format, w: &mut dyn Write) -> io::Result<()> {
    if !outcome.formats().contains(&format) {
        return Err(io::Error::new(
            io::ErrorKind::InvalidInput,
            format!("this command cannot write --format {}", format.name()),
        ));
    }
    match (outcome, format) {
        (Outcome::Wrote(_), _) => Ok(()),
        (
            Outcome::Solved {
                chip,
                state,
                sensitivities,
            },
            Format::Table,
        ) => {
            w.write_all(to_table(chip, state).as_bytes())?;
            match sensitivities {
                Some(t) => w.write_all(sensitivity_report(&chip.network, t).as_bytes()),
                None => Ok(()),
            }
        }
        (
            Outcome::Solved {
                chip,
                state,
                sensitivities,
            },
            Format::Json,
        ) => {
            let mut doc = json::solve_report(chip, state);
            doc.sensitivities = sensitivities
                .as_ref()
                .map(|t| json::sensitivity_json(&chip.network, t));
            json::write_json(&doc, w)
        }
        (
            Outcome::Solved {
                chip,
                state,
                sensitivities,
            },
            Format::Csv,
        ) => {
            let mut tables = csv::Tables::new(w);
            csv::solve_table(chip, state, &mut tables)?;
            match sensitivities {
                Some(t) => design::sensitivity_csv(&chip.network, t, &mut tables),
                None => Ok(()),
            }
        }
        (
            Outcome::Checked {
                chip,
                state,
                passed,
            },
            Format::Table,
        ) => w.write_all(check_text(chip, state, *passed).as_bytes()),
        (
            Outcome::Checked {
                chip,
                state,
                passed,
            },
            Format::Json,
        ) => {
            let mut doc = json::solve_report(chip, state);
            doc.verdict = Some(if *passed { "pass" } else { "fail" });
            json::write_json(&doc, w)
        }
        (Outcome::Checked { chip, state, .. }, Format::Csv) => {
            csv::solve_table(chip, state, &mut csv::Tables::new(w))
        }
        (
            Outcome::Tuned {
                chip,
                result,
                after,
            },
            Format::Table,
        ) => {
            w.write_all(tune_report(chip, result).as_bytes())?;
            operating_point_table(after, w)
        }
        (
            Outcome::Tuned {
                chip,
                result,
                after,
            },
            Format::Json,
        ) => design::tune_json(chip, result, after, w),
        (
            Outcome::Tuned {
                chip,
                result,
                after,
            },
            Format::Csv,
        ) => {
            let mut tables = csv::Tables::new(w);
            design::tune_csv(chip, result, &mut tables)?;
            csv::solve_table(&after.chip, &after.state, &mut tables)
        }
        (
            Outcome::Sized {
                chip,
                result,
                run,
                pitch,
                after,
            },
            f,
        ) => match f {
            Format::Table => {
                w.write_all(size_report(chip, result, *run, *pitch).as_bytes())?;
                operating_point_table(after, w)
            }
            Format::Json => design::size_json(chip, result, *run, *pitch, after, w),
            Format::Csv => {
                let mut tables = csv::Tables::new(w);
                design::size_csv(chip, result, *run, *pitch, &mut tables)?;
                csv::solve_table(&after.chip, &after.state, &mut tables)
            }
        },
        (Outcome::Evolved(o), Format::Table) => evolve::evolve_table(o, w),
        (Outcome::Evolved(o), Format::Json) => evolve::evolve_json(o, w),
        (Outcome::Evolved(o), Format::Csv) => evolve::evolve_csv(o, &mut csv::Tables::new(w)),
        (Outcome::Spread(o), Format::Table) => spread::spread_table(o, w),
        (Outcome::Spread(o), Format::Json) => spread::spread_json(o, w),
        (Outcome::Spread(o), Format::Csv) => spread::spread_csv(o, &mut csv::Tables::new(w)),
        (Outcome::Section(o), Format::Table) => w.write_all(section_report(o).as_bytes()),
        (Outcome::Section(o), Format::Json) => section::section_json(o, w),
        (Outcome::Section(o), Format::Csv) => section::section_csv(o, &mut csv::Tables::new(w)),
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
    fn csv_tables_quote_and_separate() {
        let mut out = Vec::new();
        let mut t = csv::Tables::new(&mut out);
        t.table(&["record", "name"], [vec!["a".into(), "x,y".into()]])
            .unwrap();
        t.table(&["record"], [vec!["b".into()]]).unwrap();
        assert_eq!(
            String::from_utf8(out).unwrap(),
            "record,name\na,\"x,y\"\n\nrecord\nb\n"
        );
    }
}
