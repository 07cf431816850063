//! Large systems on one core: tree, ladder and grid networks, timed through the checked solve
//! path (dead ends and series chains eliminated before the sparse Cholesky factor) beside the
//! whole-matrix factorisation, with the targets of the performance issue.
//!
//! ```text
//! cargo run --release --example large_solve                        # 10⁶ unknowns, 5 runs
//! cargo run --release --example large_solve -- --runs 9 --size 100000
//! cargo run --release --example large_solve -- --write-mtx DIR     # also write each system
//! cargo run --release --example large_solve -- --only tree         # one system
//! cargo run --release --example large_solve -- --reference         # also CHOLMOD, SuperLU
//! cargo run --release --example large_solve -- --memory fresh      # first-touch memory
//! ```
//!
//! Memory regime (`--memory`, set in the C allocator with `mallopt` on glibc, and passed to the
//! reference solvers' process through the same allocator's environment variables):
//! - `warm` (default): freed memory stays mapped, so each run reuses pages an earlier run
//!   touched: the steady state of repeated solves (a sweep, a time step, any solve after the
//!   first).
//! - `fresh`: every large array is mapped anew and its pages faulted in on first touch, as in
//!   a single solve in a new process; page faults are then a large part of the time.
//!
//! Left to its own heuristics the allocator switches between the two from run to run as the
//! sizes of the arrays freed before change, and the figures with it; either regime is
//! repeatable.
//!
//! `ref s` is a fixed reference workload timed in the same runs (a dependent random walk over
//! a 64 MB array, about the memory pattern of the solve): on a shared machine it grows with the
//! load, so runs measured at different times can be compared through total/ref.
//!
//! Systems (invented test networks):
//! - tree: a random recursive tree of `size` nodes (node i joins a uniformly random earlier
//!   node; fixed seed), the root held at 100 mbar, every 1000th node a 0 Pa outlet;
//! - ladder: two rails of `size`/2 nodes joined by rungs, 100 mbar at one corner, 0 Pa at the
//!   opposite one, a syringe pump halfway;
//! - grid: the square grid of `examples/scale.rs` with 1 001 112 channels (499 848 unknowns) at
//!   the default size, as in the issue's table.
//!
//! Phases: `assemble` = [`KirchhoffSystem::new`] (the matrix structure from the network);
//! `analyse` = [`Solver::from_system`] (elimination order, dead-end marking, analysis of what is
//! left); `factor` = [`Solver::factorize`]; `solve` = [`Factor::substitute`] (elimination,
//! triangular solves, back substitution); `check` = what [`Factor::solve`], the checked solve
//! of every command, adds to that (balance and flow checks, refinement when needed, flows).
//! `core` = analyse + factor + solve is the work a sparse solver does on a given matrix, the
//! figure the targets and the reference solvers are compared on; `total` adds assemble and
//! check. `whole` is the previous path for comparison: AMD analysis + numeric Cholesky of the
//! whole matrix + one triangular solve, no checks. Medians
//! of `--runs` runs. With `--write-mtx DIR`, each system's matrix (symmetric, lower triangle)
//! and right-hand side are written in Matrix Market format as DIR/NAME.mtx and DIR/NAME_b.mtx
//! so that other solvers can be timed on exactly the same systems. With `--reference`, the
//! systems are written (to a fresh temporary directory unless `--write-mtx` is given) and
//! `examples/reference_solvers.py` times SuiteSparse CHOLMOD and SuperLU on them in the same
//! run, its table printed after rillnet's (python3 with numpy and scipy; CHOLMOD from the
//! shared library libcholmod; without them it says what is missing and the run goes on).

use rillnet::analysis::kirchhoff::{conductances, drive_values, KirchhoffSystem, Solver};
use rillnet::prelude::*;
use rillnet::solver::{Parallelism, SymbolicCholesky};
use std::io::Write;
use std::time::Instant;

#[path = "support/grid.rs"]
mod grid;

/// Deterministic 64-bit generator (SplitMix64) so every run builds the same tree.
struct Rng(u64);
impl Rng {
    fn next(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }
}

fn section(b: &mut NetworkBuilder) -> rillnet::network::SectionId {
    b.add_section(
        "cell",
        Shape::Rectangle {
            width: Length::from_si(100e-6),
            height: Length::from_si(50e-6),
        },
    )
    .expect("valid section")
}

fn tree(size: usize) -> Network {
    let mut b = NetworkBuilder::new(Fluid::WATER_20C).with_capacity(size, size);
    let mut rng = Rng(17);
    for i in 0..size {
        let port = if i == 0 {
            Port::Pressure(Pressure::from_si(10_000.0))
        } else if i % 1000 == 999 {
            Port::Pressure(Pressure::from_si(0.0))
        } else {
            Port::Junction
        };
        b.add_node(&format!("n{i}"), port).expect("unique");
    }
    let s = section(&mut b);
    for i in 1..size {
        let parent = (rng.next() % i as u64) as usize;
        let len = Length::from_si(1e-3 * (1.0 + (i % 7) as f64));
        b.add_channel(
            &format!("c{i}"),
            &format!("n{parent}"),
            &format!("n{i}"),
            s,
            len,
        )
        .expect("valid channel");
    }
    b.build().expect("connected")
}

fn ladder(size: usize) -> Network {
    let half = size / 2;
    let mut b = NetworkBuilder::new(Fluid::WATER_20C).with_capacity(2 * half, 3 * half);
    for r in 0..2 {
        for i in 0..half {
            let port = match (r, i) {
                (0, 0) => Port::Pressure(Pressure::from_si(10_000.0)),
                (1, i) if i == half - 1 => Port::Pressure(Pressure::from_si(0.0)),
                (0, i) if i == half / 2 => Port::Flow(VolumeFlow::from_si(1e-10)),
                _ => Port::Junction,
            };
            b.add_node(&format!("r{r}_{i}"), port).expect("unique");
        }
    }
    let s = section(&mut b);
    let l = Length::from_si(1e-3);
    for i in 0..half {
        b.add_channel(
            &format!("u{i}"),
            &format!("r0_{i}"),
            &format!("r1_{i}"),
            s,
            l,
        )
        .expect("valid channel");
        if i + 1 < half {
            for r in 0..2 {
                b.add_channel(
                    &format!("s{r}_{i}"),
                    &format!("r{r}_{i}"),
                    &format!("r{r}_{}", i + 1),
                    s,
                    l,
                )
                .expect("valid channel");
            }
        }
    }
    b.build().expect("connected")
}

/// The fixed reference workload: 2²² dependent reads at random places of a 64 MB array.
fn reference() -> f64 {
    let len = 1usize << 23;
    let mut next: Vec<u64> = (0..len as u64).collect();
    let mut rng = Rng(5);
    for i in (1..len).rev() {
        let j = (rng.next() % (i as u64 + 1)) as usize;
        next.swap(i, j);
    }
    let t = Instant::now();
    let mut at = 0u64;
    for _ in 0..1 << 22 {
        at = next[at as usize];
    }
    let s = secs(t);
    std::hint::black_box(at);
    s
}

/// Set the C allocator's memory regime (see the top of this file).
fn set_memory_regime(memory: &str) -> Result<(), String> {
    if memory != "warm" && memory != "fresh" {
        return Err(format!("--memory takes warm or fresh, not '{memory}'"));
    }
    #[cfg(all(target_os = "linux", target_env = "gnu"))]
    {
        // SAFETY: mallopt only changes glibc's allocation parameters; it is called before
        // this program allocates anything large.
        let ok = unsafe {
            if memory == "warm" {
                libc::mallopt(libc::M_MMAP_MAX, 0) == 1
                    && libc::mallopt(libc::M_TRIM_THRESHOLD, libc::c_int::MAX) == 1
            } else {
                libc::mallopt(libc::M_MMAP_THRESHOLD, 128 * 1024) == 1
            }
        };
        if !ok {
            return Err("the allocator refused the memory regime (mallopt)".into());
        }
    }
    #[cfg(not(all(target_os = "linux", target_env = "gnu")))]
    println!("memory regime '{memory}' not set: it needs glibc's allocator");
    Ok(())
}

/// The same regime for the reference solvers' process, through glibc's environment
/// variables.
fn memory_environment(memory: &str) -> Vec<(&'static str, &'static str)> {
    if memory == "warm" {
        vec![
            ("MALLOC_MMAP_MAX_", "0"),
            ("MALLOC_TRIM_THRESHOLD_", "2147483647"),
        ]
    } else {
        vec![("MALLOC_MMAP_THRESHOLD_", "131072")]
    }
}

fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

fn secs(t: Instant) -> f64 {
    t.elapsed().as_secs_f64()
}

/// Write the system in Matrix Market coordinate format (never over an existing file).
fn write_mtx(dir: &std::path::Path, name: &str, net: &Network) -> std::io::Result<()> {
    let system = KirchhoffSystem::new(net);
    let g = conductances(net);
    let values = system.matrix_values(&g);
    let b = system.rhs(net, &g);
    let pattern = system.pattern();
    let create = |file: String| {
        std::fs::OpenOptions::new()
            .write(true)
            .create_new(true)
            .open(dir.join(file))
            .map(std::io::BufWriter::new)
    };
    let mut a = create(format!("{name}.mtx"))?;
    writeln!(a, "%%MatrixMarket matrix coordinate real symmetric")?;
    writeln!(
        a,
        "% rillnet Kirchhoff system '{name}': conductances [m^3/(Pa s)], lower triangle"
    )?;
    let n = pattern.dim();
    writeln!(a, "{n} {n} {}", pattern.nnz())?;
    for j in 0..n {
        let (first, rows) = pattern.column(j);
        for (t, &i) in rows.iter().enumerate() {
            writeln!(a, "{} {} {:e}", i + 1, j + 1, values[first + t])?;
        }
    }
    a.flush()?;
    let mut r = create(format!("{name}_b.mtx"))?;
    writeln!(r, "%%MatrixMarket matrix array real general")?;
    writeln!(r, "{n} 1")?;
    for v in b {
        writeln!(r, "{v:e}")?;
    }
    r.flush()
}

fn main() {
    let args: Vec<String> = std::env::args().collect();
    let flag = |name: &str| {
        args.iter()
            .position(|a| a == name)
            .and_then(|i| args.get(i + 1))
    };
    let runs: usize = flag("--runs").and_then(|v| v.parse().ok()).unwrap_or(5);
    let size: usize = flag("--size")
        .and_then(|v| v.parse().ok())
        .unwrap_or(1_000_000);
    let mtx = flag("--write-mtx").map(std::path::PathBuf::from);
    let solvers = args.iter().any(|a| a == "--reference");
    // `--reference` without `--write-mtx`: the systems go to a fresh temporary directory.
    let temporary = solvers && mtx.is_none();
    let mtx = if temporary { reference_dir() } else { mtx };
    let only = flag("--only").cloned();
    let memory = flag("--memory").map_or("warm", |m| m.as_str());
    if let Err(e) = set_memory_regime(memory) {
        eprintln!("{e}");
        std::process::exit(2);
    }
    // Grid side for ≈ size channels (708 → 1 001 112 channels at the default size).
    let side = ((size as f64 / 2.0).sqrt().ceil() as usize).max(3);
    // Targets of the issue at 10⁶ unknowns (analyse + factor + solve, one core).
    type Make = Box<dyn Fn() -> Network>;
    let systems: [(&str, Make, f64); 3] = [
        ("tree", Box::new(move || tree(size)), 0.25),
        ("ladder", Box::new(move || ladder(size)), 0.06),
        ("grid", Box::new(move || grid::grid(side)), 1.0),
    ];
    println!(
        "{:<7} {:>9} {:>10} {:>9} {:>8} {:>7} {:>7} {:>7} {:>8} {:>7} {:>8} {:>8} {:>7}  residual",
        "system",
        "unknowns",
        "eliminated",
        "assemble",
        "analyse",
        "factor",
        "solve",
        "check",
        "core s",
        "target",
        "total s",
        "whole s",
        "ref s",
    );
    for (name, make, target) in systems {
        if only.as_deref().is_some_and(|o| o != name) {
            continue;
        }
        let net = make();
        if let Some(dir) = &mtx {
            if let Err(e) = write_mtx(dir, name, &net) {
                eprintln!("cannot write {name} to {}: {e}", dir.display());
                std::process::exit(2);
            }
        }
        let g = conductances(&net);
        let drives = drive_values(&net);
        let mut t = Timings::default();
        let (mut unknowns, mut eliminated, mut residual) = (0, 0, 0.0);
        for _ in 0..runs {
            t.reference.push(reference());
            let clock = Instant::now();
            let system = KirchhoffSystem::new(&net);
            t.assemble.push(secs(clock));
            let mut b = system.rhs(&net, &g);
            let clock = Instant::now();
            let solver = Solver::from_system(&net, system).expect("analysis");
            t.analyse.push(secs(clock));
            // The factor takes its conductances by value; the copy kept for the next run is
            // made before the clock starts.
            let own = g.clone();
            let clock = Instant::now();
            let factor = solver.factorize(own).expect("factor");
            t.factor.push(secs(clock));
            let clock = Instant::now();
            factor.substitute(&mut b).expect("solve");
            t.solve.push(secs(clock));
            let clock = Instant::now();
            let sol = factor.solve(&drives).expect("solve");
            // The checked solve substitutes again; the checks are what it adds.
            t.check
                .push((secs(clock) - t.solve.last().copied().unwrap_or(0.0)).max(0.0));
            unknowns = solver.system().dim();
            eliminated = solver.eliminated();
            residual = sol.max_relative_residual;

            let system = solver.system();
            let values = system.matrix_values(&g);
            let mut x = system.rhs(&net, &g);
            let clock = Instant::now();
            let symbolic = SymbolicCholesky::analyse(system.pattern(), Parallelism::Sequential)
                .expect("analysis");
            symbolic
                .factorize(system.pattern(), &values)
                .expect("factor")
                .solve_in_place(&mut x)
                .expect("solve");
            t.whole.push(secs(clock));
        }
        let m = |v: &Vec<f64>| median(v.clone());
        let core = m(&t.analyse) + m(&t.factor) + m(&t.solve);
        let total = m(&t.assemble) + core + m(&t.check);
        println!(
            "{:<7} {:>9} {:>10} {:>9.3} {:>8.3} {:>7.3} {:>7.3} {:>7.3} {:>8.3} {:>7.2} {:>8.3} {:>8.3} {:>7.3}  {:.1e}",
            name,
            unknowns,
            eliminated,
            m(&t.assemble),
            m(&t.analyse),
            m(&t.factor),
            m(&t.solve),
            m(&t.check),
            core,
            target,
            total,
            m(&t.whole),
            m(&t.reference),
            residual
        );
    }
    println!(
        "\nseconds, medians of {runs} runs, one core, memory {memory}. assemble = the Kirchhoff structure from the \
         network; analyse = elimination order, dead-end marking, analysis of what is left; factor, \
         solve = numeric factorisation and one substitution (core = analyse + factor + solve: the \
         work a sparse solver does on a given matrix, which the targets are for); check = what the \
         checked solve of every command adds (refinement if needed, balance and flow checks, flows); \
         total = assemble + core + check; whole = AMD + Cholesky + solve of the whole matrix \
         without elimination or checks; ref = the fixed reference workload (see the top of \
         examples/large_solve.rs). Targets are for 10⁶ unknowns."
    );
    if let (true, Some(dir)) = (solvers, &mtx) {
        reference_solvers(dir, runs, temporary, memory);
    }
}

/// A fresh directory under the system's temporary directory for `--reference` (`None`, with
/// the reason printed, when it cannot be created: rillnet's own figures are still taken).
fn reference_dir() -> Option<std::path::PathBuf> {
    let nanos = std::time::SystemTime::now()
        .duration_since(std::time::UNIX_EPOCH)
        .map_or(0, |d| d.as_nanos());
    let dir = std::env::temp_dir().join(format!(
        "rillnet-large-solve-{}-{nanos}",
        std::process::id()
    ));
    match std::fs::create_dir(&dir) {
        Ok(()) => Some(dir),
        Err(e) => {
            println!(
                "reference solvers not run: cannot create {}: {e}",
                dir.display()
            );
            None
        }
    }
}

/// `--reference`: time SuiteSparse CHOLMOD and SuperLU on the systems just written to `dir`
/// (`examples/reference_solvers.py`, same number of runs), its output after rillnet's table;
/// a missing python3 or a failing script is reported and the run goes on. A temporary `dir`
/// is removed afterwards.
fn reference_solvers(dir: &std::path::Path, runs: usize, temporary: bool, memory: &str) {
    let script = std::path::Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("examples")
        .join("reference_solvers.py");
    println!(
        "\nreference solvers on the same systems ({}):",
        dir.display()
    );
    let _ = std::io::stdout().flush();
    let status = std::process::Command::new("python3")
        .arg(&script)
        .arg(dir)
        .args(["--runs", &runs.to_string()])
        .envs(memory_environment(memory))
        .status();
    match status {
        Ok(s) if s.success() => {}
        Ok(s) => println!("reference solvers failed ({s}); rillnet's figures above stand"),
        Err(e) => println!("reference solvers not run: cannot start python3: {e}"),
    }
    if temporary {
        if let Err(e) = std::fs::remove_dir_all(dir) {
            println!("cannot remove {}: {e}", dir.display());
        }
    }
}

/// Per-phase times of the runs of one system.
#[derive(Default)]
struct Timings {
    reference: Vec<f64>,
    assemble: Vec<f64>,
    analyse: Vec<f64>,
    factor: Vec<f64>,
    solve: Vec<f64>,
    check: Vec<f64>,
    whole: Vec<f64>,
}
