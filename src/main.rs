//! The `spinfold` command: `derive` writes checked closed formulas, `eval` evaluates them with the
//! integrals of a real molecule, `optimize` optimizes orbitals for an energy. Exit codes: 0 ok, 1 a
//! verification mismatch or an optimization that did not converge, 2 bad input.

use clap::{Parser, Subcommand, ValueEnum};
use spinfold::{
    Bindings, Checked, Controls, DEFAULT_SEED, Error, ErrorKind, Format, IntegralDump, Limits, MAX_CASES,
    Options, Program, Result, Route, Settings, Source, Span, derive_checked, eval_warnings, evaluate_with,
    optimize_all, optimized_dump, optimized_json, optimized_text, orbitals_text, parse_with, read_dump,
    remove_temporaries_on_signal, render, render_each, render_states, results_json, results_text,
    write_files, write_output,
};
use std::io::{Read, Write};

#[derive(Parser)]
#[command(
    name = "spinfold",
    version,
    about = "Exact energy expressions and Hamiltonian matrix elements of determinants and spin-adapted states, in spatial integrals (h, J, K, (pq|rs)), verified against brute-force determinant algebra.",
    long_about = None
)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Clone, Copy, ValueEnum)]
enum To {
    Text,
    Latex,
    Json,
    Rust,
    Python,
}

/// The integrals `eval` and `optimize` work with, and where the input's names sit among them.
#[derive(clap::Args)]
struct Molecule {
    /// Integral file in the common integral-dump text format (chemists' notation, 1-based).
    #[arg(long)]
    integrals: String,
    /// Bind an orbital, space or generic index to 1-based orbitals: a=6, core=1-5, core=1,2,4,
    /// core=none (no orbitals), i=3. `eval` tabulates an unbound generic index over its space;
    /// `optimize` needs every generic index of an optimized state bound.
    #[arg(long = "bind", value_name = "NAME=SPEC")]
    bind: Vec<String>,
}

impl Molecule {
    /// The integral file, the input derived and checked, and its names bound to the file's
    /// orbitals.
    fn load(&self, common: &Derivation) -> Result<(IntegralDump, Program, Vec<Checked>, Bindings)> {
        let dump = read_dump(&self.integrals)?;
        let (program, checked) = derived(common)?;
        let bindings = Bindings::parse(&program, &self.bind, dump.header.norb)?;
        Ok((dump, program, checked, bindings))
    }
}

#[derive(clap::Args)]
struct Derivation {
    /// Input file describing orbitals, spaces, determinants, states and requests (`-` reads standard input).
    file: String,
    /// Assume different generic indices denote different orbitals (drops Kronecker deltas).
    #[arg(long)]
    distinct: bool,
    /// Skip the numerical check against brute-force determinant algebra.
    #[arg(long)]
    no_verify: bool,
    /// Seed of the random integrals used by the check.
    #[arg(long, default_value_t = DEFAULT_SEED)]
    seed: u64,
    /// Present results with the closed-space Fock matrix f_pq = h_pq + Σ_k (2 (pq|kk) − (pk|kq))
    /// and the reference energy E_ref of the closed spaces.
    #[arg(long)]
    fock: bool,
    /// Largest number of determinants a state may expand to.
    #[arg(long, default_value_t = 200_000)]
    max_determinants: usize,
    /// Most coupled states (coupling paths) one `csfs` line may define.
    #[arg(long, default_value_t = Limits::default().max_paths)]
    max_paths: usize,
    /// Most coincidence cases of its generic indices one request may need (the product over
    /// spaces of the Bell number of the indices used there; 1 with --distinct).
    #[arg(long, default_value_t = MAX_CASES)]
    max_cases: usize,
    /// How the energy of one coupled state is derived: auto (determinants when it can be
    /// expanded), determinants, or spin-algebra.
    #[arg(long, value_enum, default_value = "auto")]
    route: RouteArg,
}

#[derive(Clone, Copy, ValueEnum)]
enum RouteArg {
    Auto,
    Determinants,
    SpinAlgebra,
}

#[derive(Subcommand)]
enum Command {
    /// Derive every request of FILE as a closed formula in spatial integrals.
    Derive {
        #[command(flatten)]
        common: Derivation,
        /// Output format.
        #[arg(long, value_enum, default_value = "text")]
        to: To,
        /// Plain ASCII text (sum, delta, sqrt) instead of Unicode.
        #[arg(long)]
        ascii: bool,
        /// With --to latex: a complete document rather than a fragment.
        #[arg(long)]
        standalone: bool,
        /// Write to this file instead of standard output; the file appears whole or not at all.
        #[arg(short, long)]
        output: Option<String>,
        /// One file per request in the directory given by -o (request_01_energy_s.rs, ...)
        /// instead of one file for the whole input.
        #[arg(long, requires = "output")]
        per_request: bool,
    },
    /// List every named state of FILE with its determinants and exact coefficients.
    States {
        /// Input file (`-` reads standard input).
        file: String,
        /// Print {"states": [...]} as JSON.
        #[arg(long)]
        json: bool,
        /// Largest number of determinants a state may expand to.
        #[arg(long, default_value_t = 200_000)]
        max_determinants: usize,
        /// Most coupled states (coupling paths) one `csfs` line may define.
        #[arg(long, default_value_t = Limits::default().max_paths)]
        max_paths: usize,
        /// Take different generic indices as different orbitals, so a csf of an excitation may
        /// open two shells on indices of one space.
        #[arg(long)]
        distinct: bool,
        /// Write to this file instead of standard output.
        #[arg(short, long)]
        output: Option<String>,
    },
    /// Evaluate every request of FILE with the integrals of an integral-dump file (hartree).
    Eval {
        #[command(flatten)]
        common: Derivation,
        #[command(flatten)]
        molecule: Molecule,
        /// Give a free coefficient a value: cg=0.98. Requests with free coefficients are evaluated
        /// at the values set; an energy with none set is given where it is stationary.
        #[arg(long = "set", value_name = "NAME=VALUE")]
        set: Vec<String>,
        /// How many of the lowest roots of each `roots` space to print (default: all up to 10,
        /// else the 10 lowest).
        #[arg(long, value_name = "N", value_parser = clap::value_parser!(u64).range(1..))]
        roots: Option<u64>,
        /// Print {"results": [...]} as JSON.
        #[arg(long)]
        json: bool,
        /// Write to this file instead of standard output.
        #[arg(short, long)]
        output: Option<String>,
    },
    /// Optimize the orbitals for every `energy` request of FILE: its total energy minimized over
    /// rotations of the integral file's orbitals (and its free coefficients), from the file's orbitals.
    Optimize {
        #[command(flatten)]
        common: Derivation,
        #[command(flatten)]
        molecule: Molecule,
        /// Print {"results": [...], "warnings": [...]} as JSON.
        #[arg(long)]
        json: bool,
        /// Converged when the Euclidean norm of the orbital gradient falls below this.
        #[arg(long, default_value_t = 1e-6, value_parser = positive, allow_negative_numbers = true)]
        gradient_tol: f64,
        /// Most quasi-Newton iterations per request; reaching it is an error (exit status 1).
        #[arg(long, default_value_t = 200, value_parser = clap::value_parser!(u64).range(1..))]
        max_iter: u64,
        /// Write the integrals in the optimized orbitals to this integral-dump file (one energy
        /// request only).
        #[arg(long, value_name = "OUT")]
        write_integrals: Option<String>,
        /// Write the optimized orbitals (columns over the file's orbitals) to this text file
        /// (one energy request only).
        #[arg(long, value_name = "OUT")]
        write_orbitals: Option<String>,
        /// Write the results to this file instead of standard output.
        #[arg(short, long)]
        output: Option<String>,
    },
}

/// A positive finite number.
fn positive(text: &str) -> std::result::Result<f64, String> {
    match text.parse::<f64>() {
        Ok(x) if x.is_finite() && x > 0.0 => Ok(x),
        _ => Err(format!("`{text}` is not a positive number (e.g. 1e-6)")),
    }
}

/// The input text and the name it is reported under. A leading byte-order mark is dropped, so
/// that columns count from the first character a person sees; text that is not UTF-8 is refused
/// at its first undecodable byte.
fn read_input(file: &str) -> Result<(String, String)> {
    let io = |e: std::io::Error| Error::new(ErrorKind::Io { path: file.into(), why: e.to_string() });
    let (name, bytes) = if file == "-" {
        let mut bytes = vec![];
        std::io::stdin().read_to_end(&mut bytes).map_err(io)?;
        ("<stdin>".to_string(), bytes)
    } else {
        (file.to_string(), std::fs::read(file).map_err(io)?)
    };
    let bytes = bytes.strip_prefix(b"\xef\xbb\xbf").unwrap_or(&bytes);
    match std::str::from_utf8(bytes) {
        Ok(text) => Ok((name, text.to_string())),
        Err(e) => {
            let at = e.valid_up_to();
            // shown with the undecodable bytes replaced, which leaves everything before them as it was
            let source = Source::new(name, String::from_utf8_lossy(bytes));
            let (line, line_start) = source.line_start(at);
            let kind = ErrorKind::NotUtf8 { byte: bytes[at], line, position: at - line_start + 1 };
            let span = Span { range: at..at + char::REPLACEMENT_CHARACTER.len_utf8(), source };
            Err(Error::at(kind, &span))
        }
    }
}

fn derived(common: &Derivation) -> Result<(Program, Vec<Checked>)> {
    let (name, text) = read_input(&common.file)?;
    let limits = Limits {
        max_determinants: common.max_determinants,
        max_paths: common.max_paths,
        distinct: common.distinct,
        ..Limits::default()
    };
    let program = parse_with(&name, &text, limits)?;
    let options = Options {
        max_cases: common.max_cases,
        distinct: common.distinct,
        max_determinants: common.max_determinants,
        fock: common.fock,
        route: match common.route {
            RouteArg::Auto => Route::Auto,
            RouteArg::Determinants => Route::Determinants,
            RouteArg::SpinAlgebra => Route::SpinAlgebra,
        },
    };
    let checked = derive_checked(&program, &options, (!common.no_verify).then_some(common.seed))?;
    Ok((program, checked))
}

fn run(cli: Cli) -> Result<()> {
    match cli.command {
        Command::Derive { common, to, ascii, standalone, output, per_request } => {
            let (program, checked) = derived(&common)?;
            let format = match to {
                To::Text => Format::Text { ascii },
                To::Latex => Format::Latex { standalone },
                To::Json => Format::Json,
                To::Rust => Format::Rust,
                To::Python => Format::Python,
            };
            match (per_request, output) {
                (true, Some(dir)) if dir == "-" => Err(Error::new(ErrorKind::Usage {
                    why: "--per-request writes one file per request into the directory given by -o, so it cannot write to standard output (`-o -`); give a directory, e.g. `-o results`".into(),
                })),
                (true, Some(dir)) => write_files(&dir, &render_each(&program, &checked, format)?),
                (_, output) => write_output(output.as_deref(), &render(&program, &checked, format)?),
            }
        }
        Command::States { file, json, max_determinants, max_paths, distinct, output } => {
            let (name, text) = read_input(&file)?;
            // listing every state expands every member of a family, used or not
            let limits = Limits { max_determinants, max_paths, expand_unused: true, distinct };
            let program = parse_with(&name, &text, limits)?;
            write_output(output.as_deref(), &render_states(&program, json))
        }
        Command::Eval { common, molecule, set, roots, json, output } => {
            let (dump, program, checked, bindings) = molecule.load(&common)?;
            let roots = roots.map(|n| usize::try_from(n).unwrap_or(usize::MAX));
            let settings = Settings::parse(&program, &set, roots)?;
            let progress = Progress::new();
            let results = evaluate_with(&program, &checked, &bindings, &dump.integrals, &settings, &|m| {
                progress.say(m)
            })?;
            let warnings = eval_warnings(&dump, &results);
            for warning in &warnings {
                eprintln!("warning: {warning}");
            }
            let text = if json { results_json(&results, &warnings) } else { results_text(&results) };
            write_output(output.as_deref(), &text)
        }
        Command::Optimize {
            common,
            molecule,
            json,
            gradient_tol,
            max_iter,
            write_integrals,
            write_orbitals,
            output,
        } => {
            let (dump, program, checked, bindings) = molecule.load(&common)?;
            let energies: Vec<&str> = program
                .requests
                .iter()
                .filter(|r| r.kind == spinfold::RequestKind::Energy)
                .map(|r| r.text.as_str())
                .collect();
            for (option, given) in
                [("--write-integrals", &write_integrals), ("--write-orbitals", &write_orbitals)]
            {
                if given.is_some() && energies.len() != 1 {
                    let listed = if energies.is_empty() {
                        "none".to_string()
                    } else {
                        energies.iter().map(|e| format!("`{e}`")).collect::<Vec<_>>().join(", ")
                    };
                    return Err(Error::new(ErrorKind::Usage {
                        why: format!(
                            "{option} writes the orbitals of one state, so FILE must have exactly one `energy` request; it has {}: {listed}. Keep the one to write in a file of its own",
                            energies.len()
                        ),
                    }));
                }
            }
            let controls =
                Controls { gradient_tol, max_iter: usize::try_from(max_iter).unwrap_or(usize::MAX) };
            let (results, warnings) = optimize_all(
                &program,
                &checked,
                &bindings,
                &dump,
                controls,
                common.max_determinants,
                &|line| {
                    let _ = writeln!(std::io::stderr(), "{line}");
                },
            )?;
            for warning in &warnings {
                eprintln!("warning: {warning}");
            }
            let text = if json { optimized_json(&results, &warnings) } else { optimized_text(&results) };
            write_output(output.as_deref(), &text)?;
            if let (Some(path), Some(result)) = (&write_integrals, results.first()) {
                write_output(Some(path), &optimized_dump(&dump, result))?;
            }
            if let (Some(path), Some(result)) = (&write_orbitals, results.first()) {
                write_output(Some(path), &orbitals_text(result))?;
            }
            Ok(())
        }
    }
}

/// Progress of long computations on standard error: nothing in the first second, then at
/// most one line a second.
struct Progress {
    start: std::time::Instant,
    last: std::cell::Cell<Option<std::time::Instant>>,
}

impl Progress {
    fn new() -> Progress {
        Progress { start: std::time::Instant::now(), last: std::cell::Cell::new(None) }
    }

    fn say(&self, message: &str) {
        let now = std::time::Instant::now();
        let quiet = self.last.get().is_some_and(|t| now - t < std::time::Duration::from_secs(1));
        if now - self.start > std::time::Duration::from_secs(1) && !quiet {
            let _ = writeln!(std::io::stderr(), "progress: {message}");
            self.last.set(Some(now));
        }
    }
}

fn main() {
    let cli = Cli::parse();
    remove_temporaries_on_signal();
    if let Err(e) = run(cli) {
        // a standard error that cannot be written (full, closed) must not turn the report of
        // one failure into a panic: the exit code still says what went wrong
        let _ = std::io::stderr().lock().write_all(e.render().as_bytes());
        std::process::exit(e.exit_code());
    }
}
