//! The bench report: measures stepgauge against the practical limit of the hardware and against a
//! general-purpose ODE solver, all in one process run, prints it and writes
//! `docs/performance.md`.
//!
//! ```sh
//! cargo run --release --manifest-path bench-report/Cargo.toml              # full report
//! cargo run --release --manifest-path bench-report/Cargo.toml -- --quick   # small sizes, smoke test
//! ```
//!
//! Options: `--quick` (small sizes, a few seconds; does not write the page unless `--out` is
//! given), `--out FILE` (default `docs/performance.md` for a full run), `--only NAME` (one
//! section: explicit, implicit, sweep, work-precision, scale; repeatable).
//! `--explicit-steps step|hand chain|cube N STEPS` runs only the steps of one loop, for
//! instruction counts with valgrind (`bench-report/explicit-instructions.sh`).
//!
//! Ratios, not absolute times, are what the report claims: absolute times depend on the machine
//! and on what else runs on it. Every timing is the median of repeats.

mod alloc;
mod explicit;
mod implicit;
mod machine;
mod scale;
mod scale_implicit;
mod sweep;
mod timing;
mod workprec;

use std::fmt::Write as _;
use std::path::PathBuf;
use std::time::Instant;

/// The counting allocator: current and peak heap bytes (see [`alloc`]).
#[global_allocator]
static ALLOCATOR: alloc::Counting = alloc::Counting;

/// One section of the report: a heading, Markdown text (tables), and the targets it claims.
pub struct Section {
    /// The heading.
    pub title: String,
    /// Markdown body: what was measured, how, and the table.
    pub body: String,
    /// One line per target: (what, measured, target, met).
    pub targets: Vec<Target>,
}

/// A target of the issue and how the measurement compares.
pub struct Target {
    /// What is measured (for example "explicit step / hand loop, n = 1e6").
    pub what: String,
    /// The measured figure, formatted.
    pub measured: String,
    /// The target, formatted (for example "<= 1.05").
    pub target: String,
    /// Whether it is met.
    pub met: bool,
    /// Threads the figure was measured on ("1", "2", "1 and 2" for a speed-up).
    pub threads: String,
}

/// Run settings shared by the sections.
#[derive(Clone, Copy, Debug)]
pub struct Settings {
    /// Small sizes and few repeats (smoke test).
    pub quick: bool,
}

fn main() {
    let mut quick = false;
    let mut out: Option<PathBuf> = None;
    let mut only: Vec<String> = Vec::new();
    let mut args = std::env::args().skip(1);
    while let Some(a) = args.next() {
        match a.as_str() {
            "--quick" => quick = true,
            "--out" => out = args.next().map(PathBuf::from),
            "--only" => only.extend(args.next()),
            "--explicit-steps" => {
                // The driver for instruction counts (bench-report/explicit-instructions.sh).
                let v: Vec<String> = args.by_ref().take(4).collect();
                let parsed = match v.as_slice() {
                    [w, m, n, s] => n
                        .parse()
                        .ok()
                        .zip(s.parse().ok())
                        .map(|(n, s)| (w, m, n, s)),
                    _ => None,
                };
                let Some((w, m, n, s)) = parsed else {
                    eprintln!("usage: bench-report --explicit-steps step|hand chain|cube N STEPS");
                    std::process::exit(2);
                };
                if let Err(e) = explicit::drive_steps(w, m, n, s) {
                    eprintln!("bench-report: {e}");
                    std::process::exit(1);
                }
                return;
            }
            "-h" | "--help" => {
                println!(
                    "usage: bench-report [--quick] [--out FILE] [--only explicit|implicit|sweep|work-precision|scale]..."
                );
                return;
            }
            other => {
                eprintln!("bench-report: unknown argument `{other}` (see --help)");
                std::process::exit(2);
            }
        }
    }
    if out.is_none() && !quick && only.is_empty() {
        let root = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("..");
        out = Some(root.join("docs/performance.md"));
    }
    let settings = Settings { quick };
    let machine = machine::describe();
    eprintln!("{}", machine.one_line());

    type SectionFn = fn(Settings) -> Section;
    let all: [(&str, SectionFn); 5] = [
        ("explicit", explicit::section),
        ("implicit", implicit::section),
        ("sweep", sweep::section),
        ("work-precision", workprec::section),
        ("scale", scale::section),
    ];
    let started = Instant::now();
    let mut sections = Vec::new();
    for (name, f) in all {
        if !only.is_empty() && !only.iter().any(|o| o == name) {
            continue;
        }
        eprintln!("== {name}");
        let t = Instant::now();
        let s = f(settings);
        eprintln!("   {:.1} s", t.elapsed().as_secs_f64());
        print!("{}", s.body);
        sections.push(s);
    }
    let page = page(&machine, &sections, started.elapsed().as_secs_f64(), quick);
    if let Some(path) = out {
        if let Err(e) = std::fs::write(&path, &page) {
            eprintln!("bench-report: cannot write `{}`: {e}", path.display());
            std::process::exit(1);
        }
        eprintln!("wrote {}", path.display());
    }
}

fn page(machine: &machine::Machine, sections: &[Section], seconds: f64, quick: bool) -> String {
    let mut s = String::new();
    let _ = writeln!(s, "# Performance\n");
    let _ = writeln!(
        s,
        "Generated by `cargo run --release --manifest-path bench-report/Cargo.toml` \
         (bench-report/src/); do not edit by hand. Every ratio is measured in the same process \
         run; timings are medians of repeats. Ratios, not absolute times, are what stepgauge \
         claims: absolute times depend on the machine and its load.\n"
    );
    let _ = writeln!(s, "- Machine: {}", machine.one_line());
    let _ = writeln!(s, "- Date: {}", machine.date);
    let _ = writeln!(
        s,
        "- Threads: {} (rayon's pool){}",
        rayon::current_num_threads(),
        if quick {
            "; QUICK RUN (small sizes)"
        } else {
            ""
        }
    );
    let _ = writeln!(s, "- Report run time: {seconds:.0} s\n");
    let _ = writeln!(s, "## Targets\n");
    let _ = writeln!(
        s,
        "| section | what | measured | target | met | threads | machine | date |"
    );
    let _ = writeln!(s, "|---|---|---|---|---|---|---|---|");
    for sec in sections {
        for t in &sec.targets {
            let _ = writeln!(
                s,
                "| {} | {} | {} | {} | {} | {} | {} | {} |",
                sec.title,
                t.what,
                t.measured,
                t.target,
                if t.met { "yes" } else { "**no**" },
                t.threads,
                machine.short(),
                machine.date
            );
        }
    }
    let _ = writeln!(s);
    for sec in sections {
        let _ = writeln!(s, "## {}\n", sec.title);
        s.push_str(&sec.body);
        s.push('\n');
    }
    s
}
