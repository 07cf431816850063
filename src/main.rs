//! The `rillnet` command: parse arguments, call the library, write its outcome, map errors to
//! exit codes (see `rillnet::error::exit`: 0 done, 1 a limit check failed, 2 bad input or
//! usage or output that could not be written, 3 results withheld by the solver).

use clap::CommandFactory;
use cli::{Cli, Colour, Command, Show, SyntaxArg};
use rillnet::commands::{self, Outcome, SensitivityChoice};
use rillnet::error::exit;
use rillnet::input::{positive_length, ChipArg};
use rillnet::progress::{Phase, Progress};
use rillnet::report::{Format, JsonLayout};
use std::io::{IsTerminal, Write};
use std::path::{Path, PathBuf};
use std::process::ExitCode;

mod cli;

fn input_error(flag: &str, message: String) -> rillnet::Error {
    rillnet::Error::Input(rillnet::format::InputError::whole_file(flag, message))
}

/// Refuse a picture path whose extension rillnet cannot draw, before any work.
fn picture_arg(path: Option<&Path>) -> Result<(), rillnet::Error> {
    match path {
        Some(p) => rillnet::plots::PictureFormat::from_path(p).map(|_| ()),
        None => Ok(()),
    }
}

/// The progress line on standard error: drawn only once the work has taken
/// [`Bar::AFTER`], never when hidden (`-q`, standard error not a terminal, JSON or CSV going
/// to a pipe), so tests and scripts never see it.
struct Bar {
    bar: Option<indicatif::ProgressBar>,
}

impl Bar {
    const AFTER: std::time::Duration = std::time::Duration::from_secs(1);

    fn new(cli: &Cli, format: Format, to_file: bool) -> Bar {
        let piped = !to_file && format != Format::Table && !std::io::stdout().is_terminal();
        let shown = !cli.quiet && !piped && std::io::stderr().is_terminal();
        let bar = shown.then(|| {
            let bar = indicatif::ProgressBar::with_draw_target(
                Some(Phase::ALL.len() as u64),
                indicatif::ProgressDrawTarget::hidden(),
            );
            if let Ok(style) = indicatif::ProgressStyle::with_template("{bar:12} {msg} ({elapsed})")
            {
                bar.set_style(style);
            }
            // Drawn from the first second on, unless the work is done by then.
            let later = bar.clone();
            std::thread::spawn(move || {
                std::thread::sleep(Self::AFTER);
                if !later.is_finished() {
                    later.set_draw_target(indicatif::ProgressDrawTarget::stderr());
                    later.enable_steady_tick(std::time::Duration::from_millis(200));
                }
            });
            bar
        });
        Bar { bar }
    }
}

/// Clears the progress line when dropped.
struct Clear(Option<&'static Bar>);

impl Drop for Clear {
    fn drop(&mut self) {
        if let Some(bar) = self.0.and_then(|b| b.bar.as_ref()) {
            bar.finish_and_clear();
        }
    }
}

impl Progress for Bar {
    fn begin(&self, phase: Phase) {
        let Some(bar) = &self.bar else { return };
        bar.set_position(phase.index() as u64);
        bar.set_message(phase.label());
    }
}

/// The progress line of a solve or check, cleared once the results are written.
static BAR: std::sync::OnceLock<Bar> = std::sync::OnceLock::new();

/// Run the command: its outcome and how to deliver it.
fn run(cli: &Cli) -> Result<(Outcome, Format, Option<PathBuf>, Vec<PathBuf>), rillnet::Error> {
    let syntax = cli.syntax.map(|s| match s {
        SyntaxArg::Json => rillnet::format::Syntax::Json,
        SyntaxArg::Yaml => rillnet::format::Syntax::Yaml,
    });
    if let Some(bytes) = cli.memory_budget {
        rillnet::memory::set_budget(bytes);
    }
    let chip = |file: &Path| ChipArg::new(file, syntax);
    Ok(match &cli.command {
        Command::Solve {
            file,
            format,
            output,
            plot,
            sensitivity,
            channels,
            mixing,
        } => {
            picture_arg(plot.as_deref())?;
            let arg = chip(file)?;
            let choice = match (sensitivity, channels.is_empty()) {
                (false, _) => SensitivityChoice::None,
                (true, true) => SensitivityChoice::Targets,
                (true, false) => SensitivityChoice::Channels(channels.clone()),
            };
            let mixing = mixing.map(|m| match m {
                cli::MixingArg::Well => rillnet::chip::species::Mixing::Well,
                cli::MixingArg::Lateral => rillnet::chip::species::Mixing::Lateral,
            });
            let request = commands::SolveRequest {
                chip: arg.input(),
                plot: plot.as_deref(),
                sensitivity: choice,
            };
            let bar = BAR.get_or_init(|| Bar::new(cli, *format, output.is_some()));
            let outcome = commands::solve_watched(&request, mixing, bar)?;
            (outcome, *format, output.clone(), vec![arg.path])
        }
        Command::Evolve {
            file,
            span,
            every,
            format,
            plot,
            channels,
        } => {
            picture_arg(plot.as_deref())?;
            let arg = chip(file)?;
            let mut req = commands::EvolveRequest::new(arg.input(), span, every);
            req.plot = plot.as_deref();
            req.channels = channels;
            (commands::evolve(&req)?, *format, None, vec![arg.path])
        }
        Command::Spread {
            file,
            samples,
            seed,
            shard,
            merge,
            format,
            output,
            plot,
            tornado,
        } => {
            picture_arg(plot.as_deref())?;
            picture_arg(tornado.as_deref())?;
            let arg = chip(file)?;
            let outcome = commands::spread(&commands::SpreadRequest {
                chip: arg.input(),
                samples: *samples,
                seed: *seed,
                shard: shard.as_deref(),
                merge,
                plot: plot.as_deref(),
                tornado: tornado.as_deref(),
            })?;
            (outcome, *format, output.clone(), vec![arg.path])
        }
        Command::Check { file, format, plot } => {
            picture_arg(plot.as_deref())?;
            let arg = chip(file)?;
            let bar = BAR.get_or_init(|| Bar::new(cli, *format, false));
            let request = commands::CheckRequest {
                chip: arg.input(),
                plot: plot.as_deref(),
            };
            let outcome = commands::check_watched(&request, bar)?;
            (outcome, *format, None, vec![arg.path])
        }
        Command::Tune {
            file,
            format,
            output,
            ignore_limits,
        } => {
            let arg = chip(file)?;
            let outcome = commands::tune(&commands::DesignRequest {
                chip: arg.input(),
                output: output.as_deref(),
                run: 0.0,
                pitch: 0.0,
                ignore_limits: *ignore_limits,
            })?;
            (outcome, *format, None, vec![arg.path])
        }
        Command::Size {
            file,
            format,
            output,
            run,
            pitch,
            ignore_limits,
        } => {
            let (run, pitch) = (
                positive_length("--run", run)?,
                positive_length("--pitch", pitch)?,
            );
            let arg = chip(file)?;
            let outcome = commands::size(&commands::DesignRequest {
                chip: arg.input(),
                output: output.as_deref(),
                run,
                pitch,
                ignore_limits: *ignore_limits,
            })?;
            (outcome, *format, None, vec![arg.path])
        }
        Command::Section {
            spec,
            file,
            name,
            viscosity,
            tolerance,
            format,
            plot,
        } => {
            picture_arg(plot.as_deref())?;
            let viscosity = match viscosity {
                Some(v) => Some(
                    v.parse::<rillnet::units::Viscosity>()
                        .map_err(|e| input_error("--viscosity", e.to_string()))?,
                ),
                None => None,
            };
            let arg = file.as_deref().map(chip).transpose()?;
            let outcome = commands::section(&commands::SectionRequest {
                spec: spec.as_deref(),
                chip: arg.as_ref().map(ChipArg::input),
                name: name.as_deref(),
                viscosity,
                tolerance: *tolerance,
                plot: plot.as_deref(),
            })?;
            let inputs = arg.map(|a| a.path).into_iter().collect();
            (outcome, *format, None, inputs)
        }
        Command::Plot {
            file,
            show,
            colour,
            species,
            skip_tubing,
            output,
        } => {
            picture_arg(Some(output))?;
            let arg = chip(file)?;
            let solutes = match (show, colour) {
                (Show::Outlets, _) => Some(commands::SolutePicture::Outlets),
                (Show::Splits, Colour::Species) => Some(commands::SolutePicture::Splits {
                    species: species.as_deref(),
                }),
                _ => None,
            };
            if let Some(picture) = solutes {
                let outcome = commands::plot_solutes(&arg.input(), picture, output)?;
                return Ok((outcome, Format::Table, None, vec![arg.path]));
            }
            let outcome = commands::plot(&commands::PlotRequest {
                chip: arg.input(),
                pressure_profile: matches!(show, Show::Pressure),
                skip_tubing: *skip_tubing,
                colour: match colour {
                    Colour::Pressure => rillnet::plots::ColourBy::Pressure,
                    Colour::Flow => rillnet::plots::ColourBy::Flow,
                    Colour::Margin => rillnet::plots::ColourBy::Margin,
                    Colour::Species => rillnet::plots::ColourBy::Pressure,
                },
                output,
            })?;
            (outcome, Format::Table, None, vec![arg.path])
        }
        Command::Report {
            file,
            output,
            into_existing,
        } => {
            let arg = chip(file)?;
            let outcome = commands::report(&commands::ReportRequest {
                chip: arg.input(),
                folder: output,
                into_existing: *into_existing,
            })?;
            (outcome, Format::Table, None, vec![arg.path])
        }
        Command::Completions { .. } | Command::Manual => unreachable!("handled before run"),
    })
}

/// Write to standard error, ignoring failure (nowhere left to report it).
fn say(text: &str) {
    if let Some(bar) = BAR.get().and_then(|b| b.bar.as_ref()) {
        bar.finish_and_clear();
    }
    let _ = writeln!(std::io::stderr(), "{text}");
}

/// Print the completion script or manual page.
fn generated(command: &Command) -> Option<std::io::Result<()>> {
    let mut out = std::io::stdout().lock();
    match command {
        Command::Completions { shell } => {
            // Generated into memory first: the generator panics on a failed write.
            let mut script = Vec::new();
            clap_complete::generate(*shell, &mut Cli::command(), "rillnet", &mut script);
            Some(out.write_all(&script).and_then(|()| out.flush()))
        }
        Command::Manual => Some(clap_mangen::Man::new(Cli::command()).render(&mut out)),
        _ => None,
    }
}

/// The exit code for a failed write to standard output: quiet success for a closed pipe.
fn stdout_failure(e: &std::io::Error) -> ExitCode {
    if e.kind() == std::io::ErrorKind::BrokenPipe {
        return ExitCode::from(exit::OK);
    }
    say(&format!("error: cannot write to standard output: {e}"));
    ExitCode::from(exit::OUTPUT_FAILED)
}

fn main() -> ExitCode {
    let cli = Cli::parse_checked();
    if let Some(result) = generated(&cli.command) {
        return result.map_or_else(|e| stdout_failure(&e), |_| ExitCode::from(exit::OK));
    }
    let started = std::time::Instant::now();
    let result = run(&cli);
    let bar = BAR.get();
    if let (Some(bar), Ok(_)) = (bar, &result) {
        bar.begin(Phase::Writing);
    }
    // Cleared when main returns, after the results are written.
    let _clear = Clear(bar);
    let (outcome, format, output, inputs) = match result {
        Ok(done) => done,
        Err(e) => {
            say(&format!("error: {e}"));
            return ExitCode::from(e.exit_code());
        }
    };
    if cli.verbose {
        say(&format!(
            "rillnet: finished the work in {:.3} s",
            started.elapsed().as_secs_f64()
        ));
    }
    let code = if outcome.passed() {
        exit::OK
    } else {
        exit::CHECK_FAILED
    };
    if let Outcome::Wrote(files) = &outcome {
        if !cli.quiet {
            for f in files {
                say(&format!("wrote {}", f.display()));
            }
        }
        return ExitCode::from(code);
    }
    // JSON: compact in files, indented on standard output, unless a flag says otherwise.
    let layout = |to_file: bool| match (cli.compact, cli.pretty) {
        (true, _) => JsonLayout::Compact,
        (_, true) => JsonLayout::Pretty,
        _ if to_file => JsonLayout::Compact,
        _ => JsonLayout::Pretty,
    };
    if let Some(path) = output {
        let protected: Vec<&Path> = inputs.iter().map(PathBuf::as_path).collect();
        let written = commands::write_outcome_as(&outcome, format, layout(true), &path, &protected);
        if let Err(e) = written {
            say(&format!("error: {e}"));
            return ExitCode::from(e.exit_code());
        }
        if !cli.quiet {
            say(&format!("wrote {}", path.display()));
        }
        return ExitCode::from(code);
    }
    let stdout = std::io::stdout();
    if cli.verbose && stdout.is_terminal() {
        say("rillnet: writing the results");
    }
    match rillnet::emit_as(&outcome, format, layout(false), &mut stdout.lock()) {
        Ok(()) => ExitCode::from(code),
        Err(e) => stdout_failure(&e),
    }
}
