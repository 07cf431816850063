//! One function per command. Each loads what it needs, runs the analysis and returns an
//! [`Outcome`]: data, not text. Rendering (table, JSON, CSV) is [`crate::report::render`]'s
//! job, and writing it is the caller's (see [`crate::emit`]).

use crate::analysis::{self, design, SteadyState};
use crate::chip::Chip;
use crate::error::Error;
use crate::network::ChannelId;
pub use crate::outcome::{Changed, Outcome, SectionOutcome, SensitivityTable};
use crate::progress::{Phase, Progress, Silent};
use crate::report::{Format, JsonLayout};
use crate::section::numeric::NumericOptions;
use crate::section::Shape;
use crate::{fluid, format, output, plots, units};
use std::path::Path;

/// Where a chip comes from: a file, or standard input (`-`) already read into text.
#[derive(Clone, Copy, Debug)]
pub enum ChipInput<'a> {
    File(&'a Path),
    /// Text read from standard input, with the syntax to parse it as.
    Text {
        text: &'a str,
        syntax: format::Syntax,
    },
}

impl ChipInput<'_> {
    /// The input file, if any (never to be overwritten by outputs of the same run).
    pub fn path(&self) -> Option<&Path> {
        match self {
            ChipInput::File(p) => Some(p),
            ChipInput::Text { .. } => None,
        }
    }

    /// Read and validate the chip.
    pub fn load(&self) -> Result<Chip, Error> {
        match *self {
            ChipInput::File(path) => crate::load_chip(path),
            ChipInput::Text { text, syntax } => {
                let cwd = |name: &str| crate::read_named_file(Path::new(name));
                Ok(format::parse_chip_with(text, "<stdin>", syntax, &cwd)?)
            }
        }
    }

    fn protected(&self) -> Vec<&Path> {
        self.path().into_iter().collect()
    }
}

/// Significant digits of written settings and sizes without a fabrication step.
pub const WRITTEN_DIGITS: usize = 6;

/// Read an edited copy back and solve it.
fn changed(chip: &Chip, edits: &[format::edit::Edit]) -> Result<Changed, Error> {
    let (text, copy) = crate::copies::edited_chip(chip, edits)?;
    let state = analysis::steady_state(&copy.network).map_err(|source| Error::Solve {
        origin: copy.source.origin.clone(),
        source,
    })?;
    Ok(Changed {
        text,
        chip: copy,
        state,
    })
}

/// Largest number of sensitivity rows printed in full (targets × channels); above it each
/// target keeps its [`SENSITIVITY_TOP`] largest rows.
pub const SENSITIVITY_ROW_LIMIT: usize = 100_000;
/// Rows kept per target channel in the summary form.
pub const SENSITIVITY_TOP: usize = 25;
/// Without targets or `--channels`, sensitivities of every channel are given only up to this
/// many channels.
pub const SENSITIVITY_ALL_CHANNELS: usize = 50;

/// Which channels' flows `solve --sensitivity` differentiates.
#[derive(Clone, Debug, Default)]
pub enum SensitivityChoice {
    /// No sensitivities.
    #[default]
    None,
    /// The chip's target channels (every channel of a small chip without targets).
    Targets,
    /// These channels, by name.
    Channels(Vec<String>),
}

/// What the `solve` command needs.
#[derive(Clone, Debug)]
pub struct SolveRequest<'a> {
    pub chip: ChipInput<'a>,
    /// Draw the shear-margin chart to this new .svg/.png file.
    pub plot: Option<&'a Path>,
    pub sensitivity: SensitivityChoice,
}

/// Load a chip and solve it (flows, then the solutes it declares), mapping a failed solve
/// to an error.
fn load_and_solve(input: &ChipInput<'_>) -> Result<(Chip, SteadyState), Error> {
    load_and_solve_with(input, None)
}

/// [`load_and_solve`] with the solute model chosen on the command line (else the chip's).
fn load_and_solve_with(
    input: &ChipInput<'_>,
    mixing: Option<crate::chip::species::Mixing>,
) -> Result<(Chip, SteadyState), Error> {
    load_and_solve_watched(input, mixing, &Silent, Text::Keep)
}

/// Whether a loaded chip keeps its text after loading (edited copies and the report page
/// need it; `solve` and `check` do not, and a 10⁶-channel file is about 100 MB).
#[derive(Clone, Copy, PartialEq, Eq)]
enum Text {
    Keep,
    Drop,
}

/// [`load_and_solve_with`] telling `progress` where the work is.
fn load_and_solve_watched(
    input: &ChipInput<'_>,
    mixing: Option<crate::chip::species::Mixing>,
    progress: &dyn Progress,
    text: Text,
) -> Result<(Chip, SteadyState), Error> {
    progress.begin(Phase::Loading);
    let mut chip = input.load()?;
    if text == Text::Drop {
        // Errors found after loading name channels and nodes, not places in the text.
        chip.source.text = String::new();
    }
    progress.begin(Phase::Solving);
    if let Some(m) = mixing {
        chip.mixing = m;
    }
    let mut state = analysis::steady_state(&chip.network).map_err(|source| Error::Solve {
        origin: chip.source.origin.clone(),
        source,
    })?;
    state.solutes = solve_solutes(&chip, &state)?;
    Ok((chip, state))
}

/// Concentrations of the chip's species in the chip's own model (`mixing:`; none declared:
/// `None`).
pub fn solve_solutes(
    chip: &Chip,
    state: &SteadyState,
) -> Result<Option<analysis::solutes::Solutes>, Error> {
    solve_solutes_with(chip, state, chip.mixing)
}

/// Concentrations of the chip's species in the given model (none declared: `None`). The
/// lateral model orders streams by the chip's drawing.
pub fn solve_solutes_with(
    chip: &Chip,
    state: &SteadyState,
    mixing: crate::chip::species::Mixing,
) -> Result<Option<analysis::solutes::Solutes>, Error> {
    if chip.species.is_empty() {
        return Ok(None);
    }
    let loads: Vec<analysis::solutes::Load<'_>> = chip
        .species
        .iter()
        .map(|s| analysis::solutes::Load {
            diffusivity: s.diffusivity.si(),
            source: &s.inlet,
        })
        .collect();
    let flows: Vec<f64> = state.channels.iter().map(|c| c.flow).collect();
    let model = match mixing {
        crate::chip::species::Mixing::Well => analysis::solutes::Model::WellMixed,
        crate::chip::species::Mixing::Lateral => {
            analysis::solutes::Model::Lateral(analysis::solutes::Layout {
                node_at: &chip.layout.node_at,
                channel_path: &chip.layout.channel_path,
            })
        }
    };
    analysis::solutes::solve_with(
        &chip.network,
        &flows,
        &state.solution.node_net_inflow,
        &loads,
        model,
    )
    .map(Some)
    .map_err(|source| Error::Solutes {
        origin: chip.source.origin.clone(),
        source,
    })
}

/// Draw the shear-margin chart of a solved chip into a new picture file.
fn margin_plot(
    chip: &Chip,
    state: &SteadyState,
    path: &Path,
    input: &ChipInput<'_>,
) -> Result<(), Error> {
    let chart = plots::MarginChart::new(chip, state).ok_or_else(|| Error::Write {
        path: path.to_path_buf(),
        reason: "no channel has a wall-shear limit, so there is no margin to chart; add \
                 'shear_limit' under fluid.cells or on a channel"
            .into(),
    })?;
    plots::save(&chart, path, &input.protected())
}

/// Load and solve a chip (and its sensitivities when asked), solutes in the chip's model.
/// The outcome's chip keeps its origin but not its text (`source.text` is empty; `check`
/// likewise).
pub fn solve(req: &SolveRequest<'_>) -> Result<Outcome, Error> {
    solve_mixing(req, None)
}

/// [`solve`] with the solute model chosen for this run (`solve --mixing`; `None`: the chip's).
pub fn solve_mixing(
    req: &SolveRequest<'_>,
    mixing: Option<crate::chip::species::Mixing>,
) -> Result<Outcome, Error> {
    solve_watched(req, mixing, &Silent)
}

/// [`solve_mixing`] telling `progress` which phase the work is in (loading, solving; the
/// caller reports writing).
pub fn solve_watched(
    req: &SolveRequest<'_>,
    mixing: Option<crate::chip::species::Mixing>,
    progress: &dyn Progress,
) -> Result<Outcome, Error> {
    let (chip, state) = load_and_solve_watched(&req.chip, mixing, progress, Text::Drop)?;
    if let Some(path) = req.plot {
        margin_plot(&chip, &state, path, &req.chip)?;
    }
    let sensitivities = match &req.sensitivity {
        SensitivityChoice::None => None,
        choice => Some(sensitivity_table(&chip, choice)?),
    };
    Ok(Outcome::Solved {
        chip: Box::new(chip),
        state,
        sensitivities,
    })
}

/// The channels whose flows are differentiated.
fn sensitivity_channels(chip: &Chip, choice: &SensitivityChoice) -> Result<Vec<ChannelId>, Error> {
    let net = &chip.network;
    let refuse = |msg: String| Error::Input(format::InputError::whole_file("--channels", msg));
    let mut ids: Vec<ChannelId> = match choice {
        SensitivityChoice::Channels(names) => names
            .iter()
            .map(|n| {
                net.channel_id(n)
                    .ok_or_else(|| refuse(format!("the chip has no channel '{n}'")))
            })
            .collect::<Result<_, _>>()?,
        _ => chip.design.target_channels(),
    };
    if ids.is_empty() {
        if net.channels.len() > SENSITIVITY_ALL_CHANNELS {
            return Err(refuse(format!(
                "the chip has no flow or split targets and {} channels; name the channels whose \
                 flows you want differentiated, e.g. --channels {}",
                net.channels.len(),
                net.channels
                    .iter()
                    .take(2)
                    .map(|c| c.name.as_str())
                    .collect::<Vec<_>>()
                    .join(",")
            )));
        }
        ids = (0..net.channels.len()).map(ChannelId).collect();
    }
    let mut seen = vec![false; net.channels.len()];
    ids.retain(|c| !std::mem::replace(&mut seen[c.0], true));
    Ok(ids)
}

fn sensitivity_table(chip: &Chip, choice: &SensitivityChoice) -> Result<SensitivityTable, Error> {
    let targets = sensitivity_channels(chip, choice)?;
    let mut rows =
        design::sensitivities(&chip.network, &targets).map_err(|source| Error::Solve {
            origin: chip.source.origin.clone(),
            source,
        })?;
    let n = chip.network.channels.len();
    let mut kept_per_target = None;
    if rows.len() > SENSITIVITY_ROW_LIMIT {
        let keep = SENSITIVITY_TOP.min(n);
        let size = |s: &design::Sensitivity| s.rel_length.map_or(0.0, f64::abs);
        let mut cut = Vec::with_capacity(keep * targets.len());
        for block in rows.chunks_mut(n) {
            block.sort_by(|a, b| size(b).total_cmp(&size(a)));
            cut.extend_from_slice(&block[..keep]);
        }
        rows = cut;
        kept_per_target = Some(keep);
    }
    Ok(SensitivityTable {
        rows,
        kept_per_target,
    })
}

/// What the `check` command needs.
#[derive(Clone, Debug)]
pub struct CheckRequest<'a> {
    pub chip: ChipInput<'a>,
    /// Draw the shear-margin chart to this new .svg/.png file.
    pub plot: Option<&'a Path>,
}

/// What `evolve` needs: the chip, the duration and the output interval as written
/// (`2 h`, `10 s`).
pub struct EvolveRequest<'a> {
    pub chip: ChipInput<'a>,
    pub duration: &'a str,
    pub every: &'a str,
    /// Draw flows (and well levels) against time to this new .svg/.png file.
    pub plot: Option<&'a Path>,
    /// Channels to draw (names); empty: [`plots::default_channels`].
    pub channels: &'a [String],
}

impl<'a> EvolveRequest<'a> {
    pub fn new(chip: ChipInput<'a>, duration: &'a str, every: &'a str) -> Self {
        EvolveRequest {
            chip,
            duration,
            every,
            plot: None,
            channels: &[],
        }
    }
}

/// The channels named by `--channels`, or the default choice.
fn picture_channels(chip: &Chip, names: &[String]) -> Result<Vec<ChannelId>, Error> {
    if names.is_empty() {
        return Ok(plots::default_channels(chip));
    }
    names
        .iter()
        .map(|n| {
            chip.network.channel_id(n).ok_or_else(|| {
                let known: Vec<&str> = (chip.network.channels.iter())
                    .take(12)
                    .map(|c| c.name.as_str())
                    .collect();
                Error::Input(format::InputError::whole_file(
                    "--channels",
                    format!(
                        "no channel '{n}' in the chip; it has {}{}",
                        known.join(", "),
                        if chip.network.channels.len() > 12 {
                            ", …"
                        } else {
                            ""
                        }
                    ),
                ))
            })
        })
        .collect()
}

/// Relative (per-step) tolerance of `evolve`'s time stepping. The global error grows as its
/// 2/3 power (second order with per-step control); at 1e-9 the closed forms in
/// `tests/evolve.rs` are met within 1e-6 of their scale.
pub const EVOLVE_RTOL: f64 = 1e-9;

/// Follow a chip in time from its state at t = 0 (wells at their levels, switched ports off):
/// the series at every `every` instant, settling times, wells running dry or equalising, and
/// the volume each port delivered.
pub fn evolve(req: &EvolveRequest<'_>) -> Result<Outcome, Error> {
    let duration = positive_duration("--for", req.duration)?;
    let every = positive_duration("--every", req.every)?;
    let chip = req.chip.load()?;
    let drawn = match req.plot {
        Some(_) => picture_channels(&chip, req.channels)?,
        None => Vec::new(),
    };
    let outcome = evolve_chip(chip, duration, every)?;
    if let Some(path) = req.plot {
        let picture = plots::TimePicture::new(&outcome.chip, &outcome.evolution, &drawn);
        plots::save(&picture, path, &req.chip.protected())?;
    }
    Ok(Outcome::Evolved(Box::new(outcome)))
}

/// The evolution of a loaded chip and the answers read off it.
fn evolve_chip(
    chip: Chip,
    duration: f64,
    every: f64,
) -> Result<crate::outcome::EvolveOutcome, Error> {
    use analysis::transient::{self, events};
    let run = transient::Run {
        duration,
        every: every.min(duration),
        rtol: EVOLVE_RTOL,
    };
    let evolution =
        transient::evolve(&chip.network, &chip.drives, run).map_err(|source| Error::Evolve {
            origin: chip.source.origin.clone(),
            source,
        })?;
    let switched = last_drive_change(&chip);
    // On a rocking platform the flows never settle: no settling times.
    let mut list = if chip.drives.rocking.is_some() {
        Vec::new()
    } else {
        events::settling(&chip.network, &evolution, switched)
    };
    list.extend(events::levels_equal(&chip.network, &evolution));
    let stopped_dry = evolution.stopped_at.is_some();
    list.extend(events::well_events(&chip.network, &evolution));
    list.sort_by(|a, b| a.time.total_cmp(&b.time));
    let delivered = events::delivered(&chip.network, &evolution);
    Ok(crate::outcome::EvolveOutcome {
        chip,
        evolution,
        events: list,
        delivered,
        stopped_dry,
    })
}

/// The last change of a drive: a switch, or the end of a ramp or schedule [s].
fn last_drive_change(chip: &Chip) -> f64 {
    (chip.drives.switch_on.iter().map(|s| s.at))
        .chain(
            chip.drives
                .profiles
                .iter()
                .filter_map(|p| p.points.last().map(|q| q.0)),
        )
        .fold(0.0, f64::max)
}

/// Whether a chip changes in time on its own: storage, or drives that change.
fn has_dynamics(chip: &Chip) -> bool {
    let d = &chip.drives;
    chip.network.nodes.iter().any(|n| n.storage.is_some())
        || !d.switch_on.is_empty()
        || !d.profiles.is_empty()
        || d.rocking.is_some()
}

/// Longest run `report` tries while waiting for the flows to settle [s] (30 days).
const REPORT_LONGEST_RUN: f64 = 30.0 * 86_400.0;

/// The evolution `report` shows (200 outputs): on a rocking platform, the last drive change
/// and 10 tilt cycles; otherwise at least a minute and twice the last drive change, ten times
/// longer until every channel's flow is within 0.1 % of the largest flow of where it is going
/// (or the run reaches 30 days). Where it is going: the changes d₁, d₂ over the last two
/// tenths of the run, taken as a geometric decay, leave d₂·ρ/(1 − ρ) to come with ρ = d₂/d₁
/// (a slow drain, ρ near 1, is not settled however small its last step).
fn evolve_for_report(chip: &Chip) -> Result<crate::outcome::EvolveOutcome, Error> {
    let last = last_drive_change(chip);
    if let Some(r) = &chip.drives.rocking {
        let t = last + 10.0 * r.period;
        return evolve_chip(chip.clone(), t, t / 200.0);
    }
    let mut t = (2.0 * last).max(60.0);
    loop {
        let o = evolve_chip(chip.clone(), t, t / 200.0)?;
        let f = &o.evolution.flows;
        let scale = f.iter().flatten().fold(0.0f64, |m, q| m.max(q.abs()));
        let n = f.len();
        let settled = match (
            f.last(),
            f.get(n.saturating_sub(21)),
            f.get(n.saturating_sub(41)),
        ) {
            (Some(a), Some(b), Some(c)) => (a.iter().zip(b).zip(c))
                .all(|((x, y), z)| still_to_come(z - y, y - x) <= 1e-3 * scale),
            _ => true,
        };
        if settled || o.stopped_dry || t >= REPORT_LONGEST_RUN {
            return Ok(o);
        }
        t = (10.0 * t).min(REPORT_LONGEST_RUN);
    }
}

/// The change still to come after two successive changes `d1`, `d2` of a geometric decay;
/// infinite when the changes do not shrink.
fn still_to_come(d1: f64, d2: f64) -> f64 {
    let (d1, d2) = (d1.abs(), d2.abs());
    if d2 == 0.0 {
        0.0
    } else if d2 < d1 {
        d2 * (d2 / d1) / (1.0 - d2 / d1)
    } else {
        f64::INFINITY
    }
}

/// A positive duration argument such as `--for '2 h'` [s].
fn positive_duration(flag: &str, text: &str) -> Result<f64, Error> {
    let bad = |message: String| Error::Input(format::InputError::whole_file(flag, message));
    let t = text
        .parse::<crate::units::Duration>()
        .map(|t| t.si())
        .map_err(|e| bad(e.to_string()))?;
    if !(t.is_finite() && t > 0.0) {
        return Err(bad(format!(
            "must be a positive duration, e.g. '2 h'; got '{text}'"
        )));
    }
    Ok(t)
}

/// Solve a chip and check it against its shear limits, pressure rating and vacuum.
pub fn check(req: &CheckRequest<'_>) -> Result<Outcome, Error> {
    check_watched(req, &Silent)
}

/// [`check`] telling `progress` which phase the work is in.
pub fn check_watched(req: &CheckRequest<'_>, progress: &dyn Progress) -> Result<Outcome, Error> {
    let (chip, state) = load_and_solve_watched(&req.chip, None, progress, Text::Drop)?;
    if let Some(path) = req.plot {
        margin_plot(&chip, &state, path, &req.chip)?;
    }
    let passed = !analysis::findings(&chip.network, &state)
        .iter()
        .any(|f| f.severity == analysis::Severity::Exceeded);
    Ok(Outcome::Checked {
        chip: Box::new(chip),
        state,
        passed,
    })
}

/// What the `section` command needs: a shape given inline, or a named section of a chip.
#[derive(Clone, Debug, Default)]
pub struct SectionRequest<'a> {
    /// Inline mapping in the chip-file syntax.
    pub spec: Option<&'a str>,
    /// Chip file and section name (a `sections:` entry, or `CHANNEL.section` for an inline one).
    pub chip: Option<ChipInput<'a>>,
    pub name: Option<&'a str>,
    /// Viscosity for the resistance (default: the chip's fluid, else water at 20 °C).
    pub viscosity: Option<units::Viscosity>,
    /// Relative error target for numerical shapes (default 1e-4).
    pub tolerance: Option<f64>,
    pub plot: Option<&'a Path>,
}

fn usage(msg: &str) -> Error {
    Error::Input(format::InputError::whole_file("section", msg))
}

/// The shape, the chip's viscosity and a label for the section asked for.
fn section_shape(req: &SectionRequest<'_>) -> Result<(Shape, Option<f64>, String), Error> {
    match (req.spec, &req.chip, req.name) {
        (Some(spec), None, None) => {
            let read = |name: &str| crate::read_named_file(Path::new(name));
            Ok((
                format::parse_section_spec(spec, "section spec", &read)?,
                None,
                "inline section".to_string(),
            ))
        }
        (None, Some(input), Some(name)) => {
            let chip = input.load()?;
            let id = chip.section_named(name).ok_or_else(|| {
                Error::Input(format::InputError::whole_file(
                    &chip.source.origin,
                    format!(
                        "no section named '{name}'; the chip has: {}",
                        chip.section_names().join(", ")
                    ),
                ))
            })?;
            Ok((
                chip.network.sections[id].shape.clone(),
                Some(chip.network.fluid.viscosity.si()),
                format!("section '{name}' of {}", chip.source.origin),
            ))
        }
        _ => Err(usage(
            "give either a section mapping, e.g. '{shape: circle, diameter: 100 um}', or --file CHIP --name SECTION",
        )),
    }
}

/// Compute one cross-section's figures (and draw its picture when asked).
pub fn section(req: &SectionRequest<'_>) -> Result<Outcome, Error> {
    let mut opts = NumericOptions::default();
    if let Some(t) = req.tolerance {
        if !(t.is_finite() && t > 0.0 && t < 0.1) {
            return Err(usage(
                "--tolerance must be a relative error between 0 and 0.1",
            ));
        }
        opts.tolerance = t;
        opts.shear_tolerance = (10.0 * t).min(0.05);
    }
    let (shape, chip_viscosity, label) = section_shape(req)?;
    let viscosity = req
        .viscosity
        .map(|v| v.si())
        .or(chip_viscosity)
        .unwrap_or(fluid::Fluid::WATER_20C.viscosity.si());
    let started = std::time::Instant::now();
    let (figures, numeric) = shape
        .figures_with(&opts)
        .map_err(|e| usage(&format!("{}: {e}", shape.kind())))?;
    let seconds = started.elapsed().as_secs_f64();
    if let Some(path) = req.plot {
        let sol = match &numeric {
            Some(sol) => sol.clone(),
            None => shape
                .solve_numeric(&opts)
                .map_err(|e| usage(&format!("{}: {e}", shape.kind())))?,
        };
        let picture = plots::SectionPicture {
            title: format!("{} — {}", shape.kind(), label),
            solution: &sol,
        };
        let protected: Vec<&Path> = req.chip.iter().filter_map(|c| c.path()).collect();
        plots::save(&picture, path, &protected)?;
    }
    Ok(Outcome::Section(Box::new(SectionOutcome {
        shape,
        figures,
        numeric,
        viscosity,
        seconds,
        label,
    })))
}

/// What `tune` and `size` need.
#[derive(Clone, Debug)]
pub struct DesignRequest<'a> {
    pub chip: ChipInput<'a>,
    /// Write the tuned/sized chip to this new file.
    pub output: Option<&'a Path>,
    /// Serpentine straight run and centre-line pitch for long sized lengths [m].
    pub run: f64,
    pub pitch: f64,
    /// Leave wall-shear limits and the pressure rating out of the problem (the old
    /// behaviour); they are still checked and reported afterwards.
    pub ignore_limits: bool,
}

fn design_error(chip: &Chip) -> impl Fn(design::DesignError) -> Error + '_ {
    move |source| Error::Design {
        origin: chip.source.origin.clone(),
        source,
    }
}

/// Significant digits tried, in order, for values written without a fabrication step: the
/// first whose copy keeps every target met before rounding within its tolerance (and exceeds
/// no limit the unrounded answer kept) is written.
pub const DIGITS_TRIED: [usize; 5] = [WRITTEN_DIGITS, 8, 10, 12, 17];

/// Write copies with more and more digits until the copy keeps what the unrounded answer
/// met; returns the copy, the digits used and the targets judged on the copy.
fn rounded_copy(
    chip: &Chip,
    unrounded: &[design::TargetOutcome],
    unrounded_within_limits: bool,
    edits: impl Fn(usize) -> Result<Vec<format::edit::Edit>, Error>,
) -> Result<(Changed, usize, Vec<design::TargetOutcome>), Error> {
    let mut last = None;
    for digits in DIGITS_TRIED {
        let after = changed(chip, &edits(digits)?)?;
        let mut judged = design::evaluate(
            &after.chip.network,
            &after.chip.design,
            &after.state.solution,
        );
        for (j, u) in judged.iter_mut().zip(unrounded) {
            j.controllable = u.controllable;
            j.not_controllable = u.not_controllable;
            j.snapping_miss = u.snapping_miss;
            j.judge();
        }
        let keeps = judged.iter().zip(unrounded).all(|(j, u)| j.met || !u.met)
            && (!unrounded_within_limits || !after.exceeds_limits());
        if keeps {
            return Ok((after, digits, judged));
        }
        last = Some((after, digits, judged));
    }
    last.ok_or_else(|| Error::Write {
        path: chip.source.origin.clone().into(),
        reason: "no copy could be written".into(),
    })
}

/// Whether the unrounded state of a design answer keeps every limit.
fn within_limits(network: &crate::network::Network, solution: &analysis::FlowSolution) -> bool {
    let state = analysis::derive(network, solution.clone());
    !analysis::findings(network, &state)
        .iter()
        .any(|f| f.severity == analysis::Severity::Exceeded)
}

/// Tune the adjustable ports of a chip to its targets (and write the tuned copy). The
/// targets are judged again on the copy as written (rounded), read back and solved.
pub fn tune(req: &DesignRequest<'_>) -> Result<Outcome, Error> {
    let chip = req.chip.load()?;
    let solver = analysis::Solver::new(&chip.network).map_err(|source| Error::Solve {
        origin: chip.source.origin.clone(),
        source,
    })?;
    let mut result = design::tune_with_options(
        &solver,
        &chip.design,
        design::TuneOptions {
            ignore_limits: req.ignore_limits,
        },
    )
    .map_err(design_error(&chip))?;
    let inside = within_limits(&chip.network, &result.solution);
    let (after, digits, judged) = rounded_copy(&chip, &result.targets, inside, |d| {
        Ok(crate::copies::tuned_edits(&chip, &result, d))
    })?;
    result.written_digits = Some(digits);
    result.all_targets_met = judged.iter().all(|t| t.met);
    result.targets = judged;
    if let Some(out) = req.output {
        crate::copies::write_copy(&after.text, out, &req.chip.protected())?;
    }
    Ok(Outcome::Tuned {
        chip: Box::new(chip),
        result,
        after: Box::new(after),
    })
}

/// Size the free channel dimensions of a chip to its targets (and write the sized copy). The
/// targets are judged again on the copy as written (rounded), read back and solved.
pub fn size(req: &DesignRequest<'_>) -> Result<Outcome, Error> {
    let chip = req.chip.load()?;
    crate::copies::check_profile_edits(&chip)?;
    let solver = analysis::Solver::new(&chip.network).map_err(|source| Error::Solve {
        origin: chip.source.origin.clone(),
        source,
    })?;
    let mut result = design::size_with_options(
        &solver,
        &chip.design,
        design::SizeOptions {
            ignore_limits: req.ignore_limits,
        },
    )
    .map_err(design_error(&chip))?;
    let inside = within_limits(&result.network, &result.solution);
    let (after, digits, judged) = rounded_copy(&chip, &result.targets, inside, |d| {
        crate::copies::sized_edits(&chip, &result, d)
    })?;
    result.written_digits = Some(digits);
    result.all_targets_met = judged.iter().all(|t| t.met);
    result.targets = judged;
    if let Some(out) = req.output {
        crate::copies::write_copy(&after.text, out, &req.chip.protected())?;
    }
    Ok(Outcome::Sized {
        chip: Box::new(chip),
        result: Box::new(result),
        run: req.run,
        pitch: req.pitch,
        after: Box::new(after),
    })
}

/// What the `plot` command needs.
#[derive(Clone, Debug)]
pub struct PlotRequest<'a> {
    pub chip: ChipInput<'a>,
    /// The pressure-along-path picture instead of the flow splits.
    pub pressure_profile: bool,
    /// Pressure paths start at the first on-chip node (round tubing at the inlet left out).
    pub skip_tubing: bool,
    pub colour: plots::ColourBy,
    pub output: &'a Path,
}

/// Draw the chip's flow-split picture or its pressure profile.
pub fn plot(req: &PlotRequest<'_>) -> Result<Outcome, Error> {
    let (chip, state) = load_and_solve(&req.chip)?;
    let protected = req.chip.protected();
    if req.pressure_profile {
        plots::save(
            &plots::PressurePicture::traced(&chip, &state, req.skip_tubing),
            req.output,
            &protected,
        )?;
    } else {
        plots::save(
            &plots::ChipPicture::new(&chip, &state, req.colour),
            req.output,
            &protected,
        )?;
    }
    Ok(Outcome::Wrote(vec![req.output.to_path_buf()]))
}

/// A picture of the solutes for `plot`.
#[derive(Clone, Copy, Debug)]
pub enum SolutePicture<'a> {
    /// The flow-split picture coloured by a species' mean concentration (by name; `None`: the
    /// first species).
    Splits { species: Option<&'a str> },
    /// Outlet concentrations against outlet.
    Outlets,
}

/// Draw a picture of the chip's solutes (in the chip's solute model).
pub fn plot_solutes(
    chip: &ChipInput<'_>,
    picture: SolutePicture<'_>,
    output: &Path,
) -> Result<Outcome, Error> {
    let (chip_data, state) = load_and_solve(chip)?;
    let refuse =
        |option: &str, msg: String| Error::Input(format::InputError::whole_file(option, msg));
    if chip_data.species.is_empty() {
        return Err(refuse(
            "--colour",
            "the chip declares no species; add them under 'species:' with concentrations at \
             the inlets, e.g. 'species: {drug: {diffusivity: 5e-10 m^2/s}}'"
                .into(),
        ));
    }
    let protected = chip.protected();
    match picture {
        SolutePicture::Splits { species } => {
            let k = match species {
                None => 0,
                Some(name) => chip_data
                    .species
                    .iter()
                    .position(|s| s.name == name)
                    .ok_or_else(|| {
                        let names: Vec<&str> =
                            chip_data.species.iter().map(|s| s.name.as_str()).collect();
                        refuse(
                            "--species",
                            format!(
                                "the chip has no species '{name}'; it declares: {}",
                                names.join(", ")
                            ),
                        )
                    })?,
            };
            let picture = plots::ChipPicture::new(&chip_data, &state, plots::ColourBy::Species(k));
            plots::save(&picture, output, &protected)?;
        }
        SolutePicture::Outlets => {
            let chart = plots::OutletChart::new(&chip_data, &state).ok_or_else(|| {
                refuse(
                    "--show",
                    "the chip has fewer than two outlets with flow; there is no gradient to plot"
                        .into(),
                )
            })?;
            plots::save(&chart, output, &protected)?;
        }
    }
    Ok(Outcome::Wrote(vec![output.to_path_buf()]))
}

/// What the `report` command needs.
#[derive(Clone, Debug)]
pub struct ReportRequest<'a> {
    pub chip: ChipInput<'a>,
    pub folder: &'a Path,
    /// Allow a folder that already has files (existing files are still never replaced).
    pub into_existing: bool,
}

fn check_report_folder(req: &ReportRequest<'_>) -> Result<(), Error> {
    let folder_err = |reason: String| Error::Write {
        path: req.folder.to_path_buf(),
        reason,
    };
    if req.folder.exists() {
        let non_empty = std::fs::read_dir(req.folder)
            .map_err(|e| folder_err(e.to_string()))?
            .next()
            .is_some();
        if non_empty && !req.into_existing {
            return Err(folder_err(
                "the folder is not empty; choose a new folder, or pass --into-existing (existing files are never replaced)"
                    .into(),
            ));
        }
    }
    Ok(())
}

/// Write tables, pictures and a self-contained HTML page into a new folder.
pub fn report(req: &ReportRequest<'_>) -> Result<Outcome, Error> {
    check_report_folder(req)?;
    let (chip, state) = load_and_solve(&req.chip)?;
    std::fs::create_dir_all(req.folder).map_err(|e| Error::Write {
        path: req.folder.to_path_buf(),
        reason: e.to_string(),
    })?;
    // A chip with storage or drives that change also gets its evolution (tables, picture).
    let evolved = if has_dynamics(&chip) {
        Some(evolve_for_report(&chip)?)
    } else {
        None
    };
    // A chip with tolerances also gets the pictures of its spread (skipped when spread
    // refuses the chip, e.g. for concentration targets).
    let spread = spread_for_report(&chip);
    let files = crate::report::folder::write(
        &chip,
        &state,
        evolved.as_ref(),
        spread.as_ref(),
        req.folder,
        &req.chip.protected(),
    )?;
    Ok(Outcome::Wrote(files))
}

/// Monte Carlo samples and seed of the spread pictures in a report.
pub const REPORT_SPREAD_SAMPLES: u64 = 10_000;

/// The spread of a chip with tolerances for its report (`None` without tolerances or when
/// spread refuses the chip).
fn spread_for_report(chip: &Chip) -> Option<analysis::spread::SpreadResult> {
    use analysis::spread::{Prepared, Shard};
    if chip.tolerances.is_empty() {
        return None;
    }
    let prepared = Prepared::new(&chip.network, &chip.design, &chip.tolerances).ok()?;
    let state = prepared.monte_carlo(REPORT_SPREAD_SAMPLES, 1, Shard::WHOLE);
    Some(prepared.finish(state, 1, Shard::WHOLE, REPORT_SPREAD_SAMPLES))
}

/// Write an outcome rendered in `format` to the new file `path` (atomically, never
/// replacing a file).
pub fn write_outcome(
    outcome: &Outcome,
    format: Format,
    path: &Path,
    protected: &[&Path],
) -> Result<(), Error> {
    write_outcome_as(outcome, format, JsonLayout::Pretty, path, protected)
}

/// [`write_outcome`] with JSON laid out as `layout`, streamed into the new file.
pub fn write_outcome_as(
    outcome: &Outcome,
    format: Format,
    layout: JsonLayout,
    path: &Path,
    protected: &[&Path],
) -> Result<(), Error> {
    output::write_new_file_with(path, protected, &mut |w| {
        crate::report::render_with(outcome, format, layout, w)
    })
}

/// What the `spread` command needs.
#[derive(Clone, Debug)]
pub struct SpreadRequest<'a> {
    pub chip: ChipInput<'a>,
    /// Samples of the whole run (all shards together).
    pub samples: u64,
    pub seed: u64,
    /// `i/n`: run only the i-th of n shards (1-based).
    pub shard: Option<&'a str>,
    /// Outputs of `spread --format json --shard i/n` to merge into the run's result.
    pub merge: &'a [std::path::PathBuf],
    /// New picture file for the distributions of the key quantities.
    pub plot: Option<&'a Path>,
    /// New picture file for the tornado chart of the variance contributions.
    pub tornado: Option<&'a Path>,
}

/// FNV-1a (64 bit) of the chip text, as 16 hex digits: shards must share it to be merged.
pub fn fingerprint(text: &str) -> String {
    let mut h: u64 = 0xcbf2_9ce4_8422_2325;
    for b in text.bytes() {
        h ^= u64::from(b);
        h = h.wrapping_mul(0x0100_0000_01b3);
    }
    format!("{h:016x}")
}

/// Parse `i/n` (1 ≤ i ≤ n).
fn parse_shard(text: &str) -> Result<analysis::spread::Shard, Error> {
    let bad = || {
        Error::Input(format::InputError::whole_file(
            "--shard",
            format!("'{text}' is not a shard 'i/n' with 1 <= i <= n (e.g. '2/8')"),
        ))
    };
    let (i, n) = text.split_once('/').ok_or_else(bad)?;
    let (index, count) = (
        i.trim().parse::<u64>().map_err(|_| bad())?,
        n.trim().parse::<u64>().map_err(|_| bad())?,
    );
    if index == 0 || index > count {
        return Err(bad());
    }
    Ok(analysis::spread::Shard { index, count })
}

/// Flows, splits and wall shear under the chip's tolerances: first order and Monte Carlo
/// (one shard of it, or the merge of every shard's output).
pub fn spread(req: &SpreadRequest<'_>) -> Result<Outcome, Error> {
    use analysis::spread::{Prepared, Shard, SpreadError, MAX_SAMPLES};
    let chip = req.chip.load()?;
    let origin = chip.source.origin.clone();
    let input = |m: String| Error::Input(format::InputError::whole_file(&origin, m));
    let prepared =
        Prepared::new(&chip.network, &chip.design, &chip.tolerances).map_err(|e| match e {
            SpreadError::Solve(source) => Error::Solve {
                origin: origin.clone(),
                source,
            },
            other => input(other.to_string()),
        })?;
    let fingerprint = fingerprint(&chip.source.text);
    let result = if req.merge.is_empty() {
        if req.samples < 2 || req.samples > MAX_SAMPLES {
            return Err(Error::Input(format::InputError::whole_file(
                "--samples",
                format!("must be between 2 and {MAX_SAMPLES}, got {}", req.samples),
            )));
        }
        let shard = req.shard.map_or(Ok(Shard::WHOLE), parse_shard)?;
        let state = prepared.monte_carlo(req.samples, req.seed, shard);
        prepared.finish(state, req.seed, shard, req.samples)
    } else {
        let (seed, total, state) = merge_shards(req.merge, &fingerprint, &prepared)?;
        prepared.finish(state, seed, Shard::WHOLE, total)
    };
    let mut protected = req.chip.protected();
    protected.extend(req.merge.iter().map(|p| p.as_path()));
    let nothing = |path: &Path| Error::Write {
        path: path.to_path_buf(),
        reason: "nothing to draw: every sample was withheld".into(),
    };
    if let Some(path) = req.plot {
        let picture = plots::SpreadPicture::new(&chip, &result).ok_or_else(|| nothing(path))?;
        plots::save(&picture, path, &protected)?;
    }
    if let Some(path) = req.tornado {
        let chart = plots::TornadoChart::new(&chip, &result).ok_or_else(|| Error::Write {
            path: path.to_path_buf(),
            reason: "nothing to draw: no key quantity varies to first order".into(),
        })?;
        plots::save(&chart, path, &protected)?;
    }
    Ok(Outcome::Spread(Box::new(crate::outcome::SpreadOutcome {
        chip,
        result,
        fingerprint,
    })))
}

/// Read shard outputs and merge them: they must come from the same chip text, seed and
/// sample count, and cover every shard of one split exactly once.
fn merge_shards(
    paths: &[std::path::PathBuf],
    fingerprint: &str,
    prepared: &analysis::spread::Prepared<'_>,
) -> Result<(u64, u64, analysis::spread::McState), Error> {
    let mut shards = Vec::new();
    for p in paths {
        let bad =
            |m: String| Error::Input(format::InputError::whole_file(&p.display().to_string(), m));
        let text = crate::read_named_file(p).map_err(&bad)?;
        let s = format::spread_state::parse_shard(&text).map_err(&bad)?;
        if s.fingerprint != fingerprint {
            return Err(bad(
                "was made from a different chip file (its fingerprint differs); merge shards \
                 of the same chip text"
                    .into(),
            ));
        }
        if !s.state.fits(prepared) {
            return Err(bad("does not match the chip's quantities".into()));
        }
        shards.push((p, s));
    }
    let Some((_, first)) = shards.first() else {
        return Err(Error::Input(format::InputError::whole_file(
            "--merge",
            "needs at least one file",
        )));
    };
    let (seed, total, count) = (first.seed, first.samples_total, first.shard.count);
    let mut seen = vec![false; usize::try_from(count).unwrap_or(usize::MAX).min(1 << 20)];
    let mut state: Option<analysis::spread::McState> = None;
    for (p, s) in shards {
        let bad =
            |m: String| Error::Input(format::InputError::whole_file(&p.display().to_string(), m));
        if s.seed != seed || s.samples_total != total || s.shard.count != count {
            return Err(bad(format!(
                "is shard {}/{} of {} samples with seed {}, but the first file is of {count} \
                 shards of {total} samples with seed {seed}",
                s.shard.index, s.shard.count, s.samples_total, s.seed
            )));
        }
        let k = (s.shard.index - 1) as usize;
        if k >= seen.len() || seen[k] {
            return Err(bad(format!(
                "shard {}/{count} is given twice",
                s.shard.index
            )));
        }
        seen[k] = true;
        state = Some(match state {
            None => s.state,
            Some(st) => st.merge(s.state),
        });
    }
    if let Some(missing) = seen.iter().position(|s| !s) {
        return Err(Error::Input(format::InputError::whole_file(
            "--merge",
            format!(
                "shard {}/{count} is missing: merge every shard of the run",
                missing + 1
            ),
        )));
    }
    Ok((seed, total, state.unwrap_or_default()))
}

#[cfg(test)]
mod tests {
    use super::still_to_come;

    #[test]
    fn a_geometric_decay_leaves_the_sum_of_its_tail() {
        // 1, 1/2: the rest is 1/4 + 1/8 + … = 1/2 (geometric series).
        assert!((still_to_come(1.0, 0.5) - 0.5).abs() < 1e-15);
        assert_eq!(still_to_come(0.0, 0.0), 0.0);
        assert_eq!(still_to_come(1.0, 1.0), f64::INFINITY);
        assert_eq!(still_to_come(-1.0, -0.5), 0.5);
    }
}
