//! The `report` folder: tables (text, JSON, CSV), every picture as SVG and PNG, and a
//! self-contained HTML page.

use crate::analysis::SteadyState;
use crate::chip::Chip;
use crate::error::Error;
use crate::{output, plots};
use std::path::{Path, PathBuf};

/// Writes new files into one folder, remembering what it wrote.
struct Folder<'a> {
    dir: &'a Path,
    protected: &'a [&'a Path],
    written: Vec<PathBuf>,
}

impl Folder<'_> {
    fn put(&mut self, name: &str, bytes: &[u8]) -> Result<(), Error> {
        let path = self.dir.join(name);
        output::write_new_file(&path, bytes, self.protected)?;
        self.written.push(path);
        Ok(())
    }

    /// Write a figure as `name.svg` and `name.png`; returns the SVG text for the page.
    fn picture(&mut self, name: &str, fig: &impl plots::Figure) -> Result<String, Error> {
        let fail = |reason: String| Error::Write {
            path: self.dir.join(name),
            reason,
        };
        let svg = plots::render(fig, plots::PictureFormat::Svg).map_err(fail)?;
        let png = plots::render(fig, plots::PictureFormat::Png).map_err(|reason| Error::Write {
            path: self.dir.join(name),
            reason,
        })?;
        self.put(&format!("{name}.svg"), &svg)?;
        self.put(&format!("{name}.png"), &png)?;
        Ok(String::from_utf8_lossy(&svg).into_owned())
    }
}

/// The files a report writes, in order.
fn file_names(state: &SteadyState, evolved: bool, spread: bool) -> Vec<String> {
    let mut names: Vec<String> = ["summary.txt", "results.json", "results.csv"]
        .map(String::from)
        .to_vec();
    let mut pictures = vec!["splits", "pressure"];
    if state.channels.iter().any(|s| s.shear_limit.is_some()) {
        pictures.push("margins");
    }
    if evolved {
        names.extend(["evolve.txt", "evolve.json", "evolve.csv"].map(String::from));
        pictures.push("evolve");
    }
    if state.solutes.is_some() {
        pictures.push("species");
        pictures.push("outlets");
    }
    if spread {
        pictures.extend(["spread", "tornado"]);
    }
    for p in pictures {
        names.push(format!("{p}.svg"));
        names.push(format!("{p}.png"));
    }
    names.push("index.html".into());
    names
}

/// Refuse before writing anything when a file of the report exists already, so a report is
/// never left half written over an old one.
fn refuse_existing(state: &SteadyState, names: (bool, bool), dir: &Path) -> Result<(), Error> {
    let taken: Vec<String> = file_names(state, names.0, names.1)
        .into_iter()
        .filter(|n| std::fs::symlink_metadata(dir.join(n)).is_ok())
        .collect();
    if taken.is_empty() {
        return Ok(());
    }
    Err(Error::Write {
        path: dir.to_path_buf(),
        reason: format!(
            "a file of this report already exists there ({}); nothing was written. Choose a new \
             folder, or move those files away",
            taken.join(", ")
        ),
    })
}

/// When the page was made: `SOURCE_DATE_EPOCH` (seconds since 1970, the reproducible-builds
/// convention) when set, otherwise now.
fn made_at() -> u64 {
    std::env::var("SOURCE_DATE_EPOCH")
        .ok()
        .and_then(|v| v.trim().parse().ok())
        .unwrap_or_else(|| {
            std::time::SystemTime::now()
                .duration_since(std::time::UNIX_EPOCH)
                .map_or(0, |d| d.as_secs())
        })
}

/// Write the report of a solved chip into `dir` (which exists); returns the files written.
pub fn write(
    chip: &Chip,
    state: &SteadyState,
    evolved: Option<&crate::outcome::EvolveOutcome>,
    spread: Option<&crate::analysis::spread::SpreadResult>,
    dir: &Path,
    protected: &[&Path],
) -> Result<Vec<PathBuf>, Error> {
    refuse_existing(state, (evolved.is_some(), spread.is_some()), dir)?;
    let mut folder = Folder {
        dir,
        protected,
        written: Vec::new(),
    };
    folder.put("summary.txt", super::to_table(chip, state).as_bytes())?;
    folder.put("results.json", super::to_json(chip, state).as_bytes())?;
    folder.put("results.csv", super::to_csv(chip, state).as_bytes())?;
    let mut pictures: Vec<(String, String)> = Vec::new();
    let colour = if state.channels.iter().any(|s| s.shear_limit.is_some()) {
        plots::ColourBy::Margin
    } else {
        plots::ColourBy::Pressure
    };
    let splits = plots::ChipPicture::new(chip, state, colour);
    pictures.push((
        if colour == plots::ColourBy::Margin {
            "Flow split coloured by wall-shear margin (limits are set): line width ∝ channel \
             width, arrows show direction."
                .into()
        } else {
            "Flow split coloured by pressure: line width ∝ channel width, arrows show direction."
                .into()
        },
        folder.picture("splits", &splits)?,
    ));
    let pressure = plots::PressurePicture::new(chip, state);
    pictures.push((
        "Pressure along the inlet–outlet paths (the largest pressure drops; node names at \
         the markers)."
            .into(),
        folder.picture("pressure", &pressure)?,
    ));
    if let Some(chart) = plots::MarginChart::new(chip, state) {
        pictures.push((
            "Wall-shear margin per channel (limit / maximum wall shear).".into(),
            folder.picture("margins", &chart)?,
        ));
    }
    if let Some(o) = evolved {
        let fail = |e: std::io::Error| Error::Write {
            path: dir.to_path_buf(),
            reason: e.to_string(),
        };
        let mut text = Vec::new();
        super::evolve::evolve_table(o, &mut text).map_err(fail)?;
        folder.put("evolve.txt", &text)?;
        let mut json = Vec::new();
        super::evolve::evolve_json(o, &mut json).map_err(fail)?;
        folder.put("evolve.json", &json)?;
        let mut csv = Vec::new();
        super::evolve::evolve_csv(o, &mut super::csv::Tables::new(&mut csv)).map_err(fail)?;
        folder.put("evolve.csv", &csv)?;
        let channels = plots::default_channels(&o.chip);
        let picture = plots::TimePicture::new(&o.chip, &o.evolution, &channels);
        pictures.push((
            "Flows (and well levels) against time from the state at t = 0; the events and \
             volumes are in evolve.txt."
                .into(),
            folder.picture("evolve", &picture)?,
        ));
    }
    if state.solutes.is_some() {
        let name = chip.species.first().map_or("", |s| s.name.as_str());
        let species = plots::ChipPicture::new(chip, state, plots::ColourBy::Species(0));
        pictures.push((
            format!("Flow split coloured by the mean concentration of '{name}'."),
            folder.picture("species", &species)?,
        ));
        // (Fewer than two outlets: no gradient to draw.)
        if let Some(chart) = plots::OutletChart::new(chip, state) {
            pictures.push((
                "Outlet concentrations (each species as a fraction of its largest inlet \
                 concentration)."
                    .into(),
                folder.picture("outlets", &chart)?,
            ));
        }
    }
    if let Some(r) = spread {
        let (distributions, tornado) = super::spread::captions(r);
        if let Some(p) = plots::SpreadPicture::new(chip, r) {
            pictures.push((distributions, folder.picture("spread", &p)?));
        }
        if let Some(t) = plots::TornadoChart::new(chip, r) {
            pictures.push((tornado, folder.picture("tornado", &t)?));
        }
    }
    let made = super::Made {
        version: env!("CARGO_PKG_VERSION").into(),
        epoch_seconds: made_at(),
        files: folder
            .written
            .iter()
            .filter_map(|p| p.file_name().map(|n| n.to_string_lossy().into_owned()))
            .collect(),
    };
    let page = super::html_page(chip, state, &pictures, &made);
    folder.put("index.html", page.as_bytes())?;
    Ok(folder.written)
}
