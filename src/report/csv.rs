//! CSV output (SI, the unit in every column name), written with the `csv` crate.
//!
//! A CSV document is one or more tables. Each table starts with a header row whose first
//! column is `record` (the record type: `node`, `channel`, `sensitivity`, `setting`,
//! `target`, `size`, `section`); tables are separated by one empty line. Within a table every
//! row has the header's number of fields; a column that does not apply to a row is empty.

use super::role;
use crate::analysis::SteadyState;
use crate::chip::Chip;
use std::io::{self, Write};

/// A number in exponent form; empty when absent or not finite.
pub(crate) fn num(v: Option<f64>) -> String {
    v.filter(|x| x.is_finite())
        .map(|x| format!("{:e}", x + 0.0))
        .unwrap_or_default()
}

/// A finite number in exponent form (empty when not finite).
pub(crate) fn n(v: f64) -> String {
    num(Some(v))
}

/// The I/O error inside a CSV error, kind kept (a closed pipe must stay a `BrokenPipe`).
fn io_error(e: csv::Error) -> io::Error {
    match e.into_kind() {
        csv::ErrorKind::Io(e) => e,
        other => io::Error::other(format!("{other:?}")),
    }
}

/// Writes the tables of one CSV document.
pub(crate) struct Tables<'w> {
    w: &'w mut dyn Write,
    tables: usize,
}

impl<'w> Tables<'w> {
    pub(crate) fn new(w: &'w mut dyn Write) -> Self {
        Tables { w, tables: 0 }
    }

    /// Write one table: its header, then its rows.
    pub(crate) fn table<I>(&mut self, header: &[&str], rows: I) -> io::Result<()>
    where
        I: IntoIterator<Item = Vec<String>>,
    {
        if self.tables > 0 {
            self.w.write_all(b"\n")?;
        }
        self.tables += 1;
        let mut out = csv::Writer::from_writer(&mut *self.w);
        out.write_record(header).map_err(io_error)?;
        for row in rows {
            debug_assert_eq!(row.len(), header.len());
            out.write_record(&row).map_err(io_error)?;
        }
        out.flush()
    }

    /// Write one table: its header, then the rows `rows` writes field by field through a
    /// [`Rows`] (no `String` per field or `Vec` per row: a 10⁶-channel solve table is about
    /// 19 million fields). Every row must end with [`Rows::end`].
    pub(crate) fn table_streamed(
        &mut self,
        header: &[&str],
        rows: impl FnOnce(&mut Rows<'_, 'w>) -> io::Result<()>,
    ) -> io::Result<()> {
        if self.tables > 0 {
            self.w.write_all(b"\n")?;
        }
        self.tables += 1;
        let mut out = csv::Writer::from_writer(&mut *self.w);
        out.write_record(header).map_err(io_error)?;
        let mut sink = Rows {
            out,
            number: String::new(),
            fields: 0,
            width: header.len(),
        };
        rows(&mut sink)?;
        sink.out.flush()
    }
}

/// The field-by-field writer of [`Tables::table_streamed`]: text and numbers are quoted and
/// formatted exactly as [`Tables::table`] does with [`num`] cells.
pub(crate) struct Rows<'a, 'w> {
    out: csv::Writer<&'a mut (dyn Write + 'w)>,
    /// Reused for each number's text.
    number: String,
    fields: usize,
    width: usize,
}

impl Rows<'_, '_> {
    /// A text field.
    pub(crate) fn text(&mut self, field: &str) -> io::Result<()> {
        self.fields += 1;
        self.out.write_field(field).map_err(io_error)
    }

    /// A number in exponent form, as [`num`] writes it (empty when absent or not finite).
    pub(crate) fn num(&mut self, v: Option<f64>) -> io::Result<()> {
        use std::fmt::Write as _;
        self.number.clear();
        if let Some(x) = v.filter(|x| x.is_finite()) {
            // Writing into a String cannot fail.
            let _ = write!(self.number, "{:e}", x + 0.0);
        }
        self.fields += 1;
        self.out.write_field(&self.number).map_err(io_error)
    }

    /// `n` empty fields.
    pub(crate) fn empty(&mut self, n: usize) -> io::Result<()> {
        for _ in 0..n {
            self.text("")?;
        }
        Ok(())
    }

    /// End the row.
    pub(crate) fn end(&mut self) -> io::Result<()> {
        debug_assert_eq!(self.fields, self.width);
        self.fields = 0;
        self.out.write_record(None::<&[u8]>).map_err(io_error)
    }
}

const SOLVE_HEADER: &[&str] = &[
    "record",
    "name",
    "kind",
    "from",
    "to",
    "pressure_pa",
    "flow_into_chip_m3_per_s",
    "flow_m3_per_s",
    "pressure_drop_pa",
    "resistance_pa_s_per_m3",
    "mean_velocity_m_per_s",
    "reynolds",
    "wall_shear_mean_pa",
    "wall_shear_max_pa",
    "shear_limit_pa",
    "shear_margin",
    "entrance_length_m",
    "residence_time_s",
    "power_w",
];

/// The solve table: a row per node and per channel, told apart by `record`, streamed field
/// by field (the same bytes as `solve_table_rows`, the row-by-row form kept for the test
/// that compares them).
pub(crate) fn solve_table(
    chip: &Chip,
    state: &SteadyState,
    tables: &mut Tables<'_>,
) -> io::Result<()> {
    let network = &chip.network;
    let extra = super::solutes::csv_columns(chip);
    let mut header: Vec<&str> = SOLVE_HEADER.to_vec();
    header.extend(extra.iter().map(String::as_str));
    tables.table_streamed(&header, |rows| {
        for (i, nd) in network.nodes.iter().enumerate() {
            rows.text("node")?;
            rows.text(&nd.name)?;
            rows.text(role(nd.port))?;
            rows.empty(2)?;
            rows.num(Some(state.solution.pressures[i]))?;
            rows.num(state.port(network, i).map(|p| p.flow_into_chip))?;
            rows.empty(SOLVE_HEADER.len() - 7)?;
            for v in super::solutes::csv_values(chip, state, super::solutes::At::Node(i)) {
                rows.num(v)?;
            }
            rows.end()?;
        }
        let channels = network.channels.iter().zip(&state.channels).enumerate();
        for (k, (c, s)) in channels {
            rows.text("channel")?;
            rows.text(&c.name)?;
            rows.text(network.sections[c.section].shape.kind())?;
            rows.text(&network.nodes[c.from].name)?;
            rows.text(&network.nodes[c.to].name)?;
            rows.empty(2)?;
            for v in [
                s.flow,
                s.pressure_drop,
                s.resistance,
                s.mean_velocity,
                s.reynolds,
                s.wall_shear_mean,
                s.wall_shear_max,
            ] {
                rows.num(Some(v))?;
            }
            rows.num(s.shear_limit)?;
            rows.num(s.shear_margin)?;
            for v in [s.entrance_length, s.residence_time, s.power] {
                rows.num(Some(v))?;
            }
            for v in super::solutes::csv_values(chip, state, super::solutes::At::Channel(k)) {
                rows.num(v)?;
            }
            rows.end()?;
        }
        Ok(())
    })
}

/// [`solve_table`] built row by row (a `Vec<String>` per row): the form the streamed table
/// replaced, kept to check that both write the same bytes.
#[cfg(test)]
pub(crate) fn solve_table_rows(
    chip: &Chip,
    state: &SteadyState,
    tables: &mut Tables<'_>,
) -> io::Result<()> {
    let network = &chip.network;
    let extra = super::solutes::csv_columns(chip);
    let mut header: Vec<&str> = SOLVE_HEADER.to_vec();
    header.extend(extra.iter().map(String::as_str));
    let nodes = network.nodes.iter().enumerate().map(|(i, nd)| {
        let mut row = vec![String::new(); SOLVE_HEADER.len()];
        row[0] = "node".into();
        row[1] = nd.name.clone();
        row[2] = role(nd.port).into();
        row[5] = n(state.solution.pressures[i]);
        row[6] = num(state.port(network, i).map(|p| p.flow_into_chip));
        row.extend(super::solutes::csv_cells(
            chip,
            state,
            super::solutes::At::Node(i),
        ));
        row
    });
    let channels = network.channels.iter().zip(&state.channels).enumerate();
    let channels = channels.map(|(k, (c, s))| {
        let mut row = vec![
            "channel".into(),
            c.name.clone(),
            network.sections[c.section].shape.kind().into(),
            network.nodes[c.from].name.clone(),
            network.nodes[c.to].name.clone(),
            String::new(),
            String::new(),
            n(s.flow),
            n(s.pressure_drop),
            n(s.resistance),
            n(s.mean_velocity),
            n(s.reynolds),
            n(s.wall_shear_mean),
            n(s.wall_shear_max),
            num(s.shear_limit),
            num(s.shear_margin),
            n(s.entrance_length),
            n(s.residence_time),
            n(s.power),
        ];
        row.extend(super::solutes::csv_cells(
            chip,
            state,
            super::solutes::At::Channel(k),
        ));
        row
    });
    tables.table(&header, nodes.chain(channels))
}

/// The solve report as CSV text (one table).
pub fn to_csv(chip: &Chip, state: &SteadyState) -> String {
    let mut out = Vec::new();
    // Writing into memory cannot fail.
    let _ = solve_table(chip, state, &mut Tables::new(&mut out));
    String::from_utf8_lossy(&out).into_owned()
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Both forms of the solve table, as text.
    fn both(chip: &Chip, state: &SteadyState) -> (String, String) {
        let (mut streamed, mut rows) = (Vec::new(), Vec::new());
        solve_table(chip, state, &mut Tables::new(&mut streamed)).unwrap();
        solve_table_rows(chip, state, &mut Tables::new(&mut rows)).unwrap();
        (
            String::from_utf8(streamed).unwrap(),
            String::from_utf8(rows).unwrap(),
        )
    }

    /// The chip's species in `model` (as the solve command computes them).
    fn solutes(
        chip: &Chip,
        state: &SteadyState,
        model: crate::analysis::solutes::Model<'_>,
    ) -> Option<crate::analysis::solutes::Solutes> {
        if chip.species.is_empty() {
            return None;
        }
        let loads: Vec<_> = (chip.species.iter())
            .map(|s| crate::analysis::solutes::Load {
                diffusivity: s.diffusivity.si(),
                source: &s.inlet,
            })
            .collect();
        let flows: Vec<f64> = state.channels.iter().map(|c| c.flow).collect();
        let inflow = &state.solution.node_net_inflow;
        Some(
            crate::analysis::solutes::solve_with(&chip.network, &flows, inflow, &loads, model)
                .unwrap(),
        )
    }

    #[test]
    fn streamed_rows_equal_the_row_by_row_table_on_the_demo_chips() {
        let dir = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("networks");
        let mut compared = 0;
        let mut paths: Vec<_> = std::fs::read_dir(&dir)
            .unwrap()
            .map(|e| e.unwrap().path())
            .filter(|p| p.extension().is_some_and(|e| e == "yaml"))
            .collect();
        paths.sort();
        for path in paths {
            let mut chip = crate::load_chip(&path).unwrap();
            let Ok(mut state) = crate::analysis::steady_state(&chip.network) else {
                continue;
            };
            let well = crate::analysis::solutes::Model::WellMixed;
            state.solutes = solutes(&chip, &state, well);
            let (streamed, rows) = both(&chip, &state);
            assert_eq!(streamed, rows, "{}", path.display());
            assert!(streamed.lines().count() > chip.network.channels.len());
            compared += 1;
            if !chip.species.is_empty() {
                // The lateral model adds min, max and mixing-index columns.
                chip.mixing = crate::chip::species::Mixing::Lateral;
                let lateral =
                    crate::analysis::solutes::Model::Lateral(crate::analysis::solutes::Layout {
                        node_at: &chip.layout.node_at,
                        channel_path: &chip.layout.channel_path,
                    });
                state.solutes = solutes(&chip, &state, lateral);
                let (streamed, rows) = both(&chip, &state);
                assert!(streamed.lines().next().unwrap().contains("mixing_index_"));
                assert_eq!(streamed, rows, "{} (lateral)", path.display());
                compared += 1;
            }
        }
        assert!(compared >= 8, "only {compared} tables compared");
    }

    #[test]
    fn streamed_rows_quote_names_as_the_row_by_row_table() {
        let text = r#"{"fluid": {"viscosity": "1 mPa*s", "density": "1000 kg/m^3"},
            "sections": {"s": {"shape": "circle", "diameter": "100 um"}},
            "nodes": {"in, left": {"pressure": "1 kPa"}, "mid \"q\"": {}, "out": {"pressure": "0 Pa"}},
            "channels": {"a,b": {"from": "in, left", "to": "mid \"q\"", "section": "s", "length": "1 mm"},
                         "c d": {"from": "mid \"q\"", "to": "out", "section": "s", "length": "2 mm"}}}"#;
        let chip = crate::format::parse_chip(text, "t.json", crate::format::Syntax::Json).unwrap();
        let state = crate::analysis::steady_state(&chip.network).unwrap();
        let (streamed, rows) = both(&chip, &state);
        assert!(streamed.contains("\"in, left\""), "{streamed}");
        assert!(streamed.contains("\"mid \"\"q\"\"\""), "{streamed}");
        assert_eq!(streamed, rows);
    }
}
