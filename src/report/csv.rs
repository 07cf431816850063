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

/// The solve table: a row per node and per channel, told apart by `record`.
pub(crate) fn solve_table(
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
