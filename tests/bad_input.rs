//! Bad input to `spinfold derive`: every kind of mistake ends with exit code 2 and a report
//! that names the file, line and column, puts a caret under the offending text, says in a
//! sentence what is wrong, and never panics; characters a terminal would not show as themselves
//! are shown escaped, with the caret under them; lines end at `\n`, `\r\n` or a `\r` alone, as
//! in the grammar. Also: a missing input file, standard input, a byte-order mark, input that is
//! not UTF-8, `-o` writing its file whole or not at all, and a report that cannot be written
//! keeping its exit code.

use std::io::Write;
use std::path::Path;
use std::process::{Command, Output, Stdio};

/// The result of one run of the binary.
struct Run {
    code: Option<i32>,
    stdout: String,
    stderr: String,
}

impl From<Output> for Run {
    fn from(output: Output) -> Run {
        Run {
            code: output.status.code(),
            stdout: String::from_utf8_lossy(&output.stdout).into_owned(),
            stderr: String::from_utf8_lossy(&output.stderr).into_owned(),
        }
    }
}

fn spinfold(dir: &Path, args: &[&str]) -> Run {
    Command::new(env!("CARGO_BIN_EXE_spinfold"))
        .args(args)
        .current_dir(dir)
        .stdin(Stdio::null())
        .output()
        .expect("the binary runs")
        .into()
}

/// Writes `text` as `name` in a fresh directory and runs `spinfold derive name`, so that the
/// report names the file exactly as written.
fn derive(name: &str, text: &str) -> Run {
    let dir = tempfile::tempdir().expect("a temporary directory");
    std::fs::write(dir.path().join(name), text).expect("the input is written");
    spinfold(dir.path(), &["derive", name])
}

/// Where a report should point: line and column (1-based) and the text under the caret
/// (empty when the caret marks a place rather than a stretch, e.g. the end of a line).
struct At<'a> {
    line: usize,
    column: usize,
    underlined: &'a str,
}

fn at(line: usize, column: usize, underlined: &str) -> At<'_> {
    At { line, column, underlined }
}

/// The part of a rendered line after the gutter `│ `, if it has one.
fn after_gutter(line: &str) -> Option<&str> {
    let (_, rest) = line.split_once('│')?;
    Some(rest.strip_prefix(' ').unwrap_or(rest))
}

/// Checks that the report shows the source line `number` (whose text is `source_line`) with
/// a run of `mark` characters under `underlined` starting at `column`.
fn shows_mark(
    stderr: &str,
    number: usize,
    source_line: &str,
    column: usize,
    underlined: &str,
    mark: char,
) -> bool {
    let lines: Vec<&str> = stderr.lines().collect();
    for (k, line) in lines.iter().enumerate() {
        let Some((gutter, _)) = line.split_once('│') else { continue };
        if gutter.trim() != number.to_string() || after_gutter(line) != Some(source_line) {
            continue;
        }
        for below in &lines[k + 1..] {
            let Some(text) = after_gutter(below) else { break };
            if text.trim().is_empty() {
                break;
            }
            let chars: Vec<char> = text.chars().collect();
            let start = column - 1;
            if chars.get(start) != Some(&mark) || chars[..start].contains(&mark) {
                continue;
            }
            let run = chars[start..].iter().take_while(|&&c| c == mark).count();
            let wanted: String = source_line.chars().skip(start).take(run).collect();
            // the marks cover the offending text exactly (a trailing blank is tolerated)
            let fits = if underlined.is_empty() { run == 1 } else { wanted.trim_end() == underlined };
            if fits {
                return true;
            }
        }
    }
    false
}

/// Checks a bad-input report: exit code 2, `file:line:column:` with the sentence `says` (every
/// fragment), the caret under the offending text, a help line, and no panic.
fn assert_reported(run: &Run, file: &str, input: &str, place: At, says: &[&str]) {
    assert_reported_at_one_of(run, file, input, &[place], says)
}

/// As `assert_reported`, accepting any one of several places.
fn assert_reported_at_one_of(run: &Run, file: &str, input: &str, places: &[At], says: &[&str]) {
    let stderr = &run.stderr;
    assert_eq!(run.code, Some(2), "exit code 2 for bad input; stderr:\n{stderr}");
    assert!(!stderr.contains("panicked"), "no panic:\n{stderr}");
    assert!(run.stdout.is_empty(), "nothing on standard output for bad input:\n{}", run.stdout);
    let first = stderr.lines().next().unwrap_or("");
    assert!(first.starts_with("error: "), "the report starts with `error: `:\n{stderr}");
    let found = places.iter().any(|p| {
        let location = format!("{file}:{}:{}: ", p.line, p.column);
        let source_line = input.lines().nth(p.line - 1).unwrap_or("");
        first.contains(&location) && shows_mark(stderr, p.line, source_line, p.column, p.underlined, '^')
    });
    assert!(
        found,
        "the report names {file} with line:column and puts a caret under {:?}:\n{stderr}",
        places.iter().map(|p| (p.line, p.column, p.underlined)).collect::<Vec<_>>()
    );
    for fragment in says {
        assert!(first.contains(fragment), "the sentence says {fragment:?}:\n{stderr}");
    }
    let sentence = first.rsplit(": ").next().unwrap_or("");
    assert!(sentence.split_whitespace().count() >= 3, "a sentence, not a code:\n{stderr}");
    assert!(stderr.contains("help: "), "the report says how to fix it:\n{stderr}");
}

#[test]
fn misspelt_keyword_is_a_parse_error() {
    let input = "orbitals a b\nstat S = | a b |\nenergy S\n";
    let run = derive("misspelt.spinfold", input);
    assert_reported(
        &run,
        "misspelt.spinfold",
        input,
        at(2, 1, "s"),
        &["cannot be read", "expected a statement", "`state`"],
    );
}

#[test]
fn misspelt_keyword_on_the_first_line_is_a_parse_error() {
    let input = "orbital a b\ndet D = | a b |\n";
    let run = derive("first.spinfold", input);
    assert_reported(&run, "first.spinfold", input, at(1, 1, "o"), &["expected a statement", "`orbitals`"]);
    assert!(!run.stderr.contains("something else"), "{}", run.stderr);
}

#[test]
fn missing_bar_is_a_parse_error() {
    let input = "orbitals a b\ndet D = | a b\nenergy D\n";
    let run = derive("bar.spinfold", input);
    assert_reported(&run, "bar.spinfold", input, at(2, 14, ""), &["cannot be read", "expected"]);
}

#[test]
fn missing_bar_is_named_in_the_parse_error() {
    let input = "orbitals a b\ndet D = | a b\nenergy D\n";
    let run = derive("bar.spinfold", input);
    assert_reported(&run, "bar.spinfold", input, at(2, 14, ""), &["`|`"]);
    assert!(!run.stderr.contains("something else"), "{}", run.stderr);
}

#[test]
fn undefined_name() {
    let input = "orbitals a\nenergy | a c |\n";
    let run = derive("undefined.spinfold", input);
    assert_reported(&run, "undefined.spinfold", input, at(2, 12, "c"), &["`c` is not defined"]);

    let input = "orbitals a\ndet D = | a |\nenergy S\n";
    let run = derive("undefined_state.spinfold", input);
    assert_reported(&run, "undefined_state.spinfold", input, at(3, 8, "S"), &["`S` is not defined"]);
}

#[test]
fn name_of_the_wrong_kind() {
    let input = "orbitals a\nenergy a\n";
    let run = derive("kind.spinfold", input);
    assert_reported(
        &run,
        "kind.spinfold",
        input,
        at(2, 8, "a"),
        &["`a` is an orbital", "determinant or state"],
    );
}

#[test]
fn redefinition_shows_both_places() {
    let input = "orbitals a b\nspace a\n";
    let run = derive("twice.spinfold", input);
    assert_reported(&run, "twice.spinfold", input, at(2, 7, "a"), &["`a` is defined twice"]);
    assert!(run.stderr.contains("first defined here"), "{}", run.stderr);
    assert!(
        shows_mark(&run.stderr, 1, "orbitals a b", 10, "a", '-'),
        "the first definition is marked:\n{}",
        run.stderr
    );

    let input = "orbitals a b\ndet D = | a |\n\ndet D = | b |\n";
    let run = derive("twice_det.spinfold", input);
    assert_reported(&run, "twice_det.spinfold", input, at(4, 5, "D"), &["`D` is defined twice"]);
    assert!(shows_mark(&run.stderr, 2, "det D = | a |", 5, "D", '-'), "{}", run.stderr);
}

#[test]
fn pauli_violation_of_a_spin_orbital() {
    let input = "orbitals a\nenergy | a a |\n";
    let run = derive("pauli.spinfold", input);
    assert_reported(
        &run,
        "pauli.spinfold",
        input,
        at(2, 12, "a"),
        &["spin orbital a is occupied twice", "Pauli"],
    );

    let input = "orbitals a\ndet D = | a^2 a' |\n";
    let run = derive("pauli_beta.spinfold", input);
    assert_reported(
        &run,
        "pauli_beta.spinfold",
        input,
        at(2, 15, "a'"),
        &["spin orbital a' is occupied twice"],
    );
}

#[test]
fn pauli_violation_of_a_closed_space() {
    let input = "space core\nenergy | core^2 core^2 |\n";
    let run = derive("pauli_core.spinfold", input);
    assert_reported(
        &run,
        "pauli_core.spinfold",
        input,
        at(2, 17, "core^2"),
        &["`core` is closed twice", "Pauli"],
    );
    assert!(run.stderr.contains("write `core^2` once"), "{}", run.stderr);
}

#[test]
fn space_without_square() {
    let input = "orbitals a\nspace core\nenergy | core a |\n";
    let run = derive("square.spinfold", input);
    assert_reported(&run, "square.spinfold", input, at(3, 10, "core"), &["`core`", "without `^2`"]);
    assert!(run.stderr.contains("write `core^2`"), "{}", run.stderr);
}

#[test]
fn empty_state() {
    let input = "orbitals a b\ndet ab = | a b |\nstate X = ab - ab\nenergy X\n";
    let run = derive("empty.spinfold", input);
    // diagnosed where the state is defined, or where it is first used
    assert_reported_at_one_of(
        &run,
        "empty.spinfold",
        input,
        &[at(3, 11, "ab - ab"), at(4, 1, "energy X")],
        &["`X`", "no determinant left"],
    );
}

#[test]
fn empty_state_is_reported_at_its_definition() {
    let input = "orbitals a b\ndet ab = | a b |\nstate X = ab - ab\n";
    let run = derive("empty.spinfold", input);
    assert_reported(&run, "empty.spinfold", input, at(3, 11, "ab - ab"), &["`X`", "no determinant left"]);
}

#[test]
fn zero_norm() {
    // | b a | = -| a b |: the two determinants cancel only once they are put in one order
    let input = "orbitals a b\nstate X = | a b | + | b a |\nenergy X\n";
    let run = derive("zero.spinfold", input);
    assert_reported_at_one_of(
        &run,
        "zero.spinfold",
        input,
        &[at(2, 11, "| a b | + | b a |"), at(3, 1, "energy X")],
        &["`X`"],
    );
    let first = run.stderr.lines().next().unwrap_or("");
    assert!(first.contains("zero norm") || first.contains("no determinant left"), "{}", run.stderr);
}

#[test]
fn square_root_of_a_negative_number() {
    let input = "orbitals a b\nstate X = sqrt(-2) | a b |\n";
    let run = derive("sqrt.spinfold", input);
    assert_reported(&run, "sqrt.spinfold", input, at(2, 16, "-2"), &["coefficient is not exact", "negative"]);
}

#[test]
fn sum_of_different_roots_as_a_coefficient() {
    let input = "orbitals a b\nstate X = (1 + sqrt(2)) | a b |\n";
    let run = derive("sum.spinfold", input);
    assert_reported(
        &run,
        "sum.spinfold",
        input,
        at(2, 12, "1 + sqrt(2)"),
        &["coefficient is not exact", "sum of different square roots"],
    );
}

#[test]
fn division_by_zero() {
    let input = "orbitals a b\nstate X = | a b |/0\n";
    let run = derive("zero_div.spinfold", input);
    assert_reported(&run, "zero_div.spinfold", input, at(2, 19, "0"), &["divides by zero"]);

    let input = "orbitals a b\nstate X = 1/(2 - 2) | a b |\n";
    let run = derive("zero_div2.spinfold", input);
    assert_reported(&run, "zero_div2.spinfold", input, at(2, 13, "(2 - 2)"), &["divides by zero"]);
}

#[test]
fn number_standing_alone_as_a_state() {
    let input = "orbitals a b\nstate X = 3\n";
    let run = derive("alone.spinfold", input);
    assert_reported(&run, "alone.spinfold", input, at(2, 11, "3"), &["number stands alone"]);

    let input = "orbitals a b\nstate X = | a b | + 2\n";
    let run = derive("alone_sum.spinfold", input);
    assert_reported(&run, "alone_sum.spinfold", input, at(2, 21, "2"), &["number stands alone"]);
}

#[test]
fn two_states_multiplied() {
    let input = "orbitals a b\ndet A = | a |\ndet B = | b |\nstate X = A B\n";
    let run = derive("times.spinfold", input);
    assert_reported(&run, "times.spinfold", input, at(4, 13, "B"), &["two states are multiplied"]);

    let input = "orbitals a b\ndet A = | a |\ndet B = | b |\nstate X = A * B\n";
    let run = derive("times_star.spinfold", input);
    assert_reported(&run, "times_star.spinfold", input, at(4, 15, "B"), &["two states are multiplied"]);
}

#[test]
fn excitation_with_unequal_lengths() {
    let input = "orbitals a b c\ndet R = | a a' |\nenergy R[a -> b c]\n";
    let run = derive("lengths.spinfold", input);
    assert_reported(
        &run,
        "lengths.spinfold",
        input,
        at(3, 9, "[a -> b c]"),
        &["removes 1 electron(s) but adds 2"],
    );
}

#[test]
fn excitation_removing_an_unoccupied_spin_orbital() {
    let input = "orbitals a b c\ndet R = | a a' |\nenergy R[b -> c]\n";
    let run = derive("unoccupied.spinfold", input);
    assert_reported_at_one_of(
        &run,
        "unoccupied.spinfold",
        input,
        &[at(3, 9, "[b -> c]"), at(3, 1, "energy R[b -> c]")],
        &["b is not occupied"],
    );
}

#[test]
fn excitation_removing_an_unoccupied_spin_orbital_is_reported_at_its_definition() {
    let input = "orbitals a b c\ndet R = | a a' |\nstate X = R[b -> c]\n";
    let run = derive("unoccupied.spinfold", input);
    assert_reported(&run, "unoccupied.spinfold", input, at(3, 11, "R[b -> c]"), &["b is not occupied"]);
}

#[test]
fn different_closed_spaces_in_bra_and_ket() {
    let input = "orbitals a\nspace core\nspace val\nelement | core^2 a | | val^2 a |\n";
    let run = derive("closed.spinfold", input);
    assert_reported(
        &run,
        "closed.spinfold",
        input,
        at(4, 1, "element | core^2 a | | val^2 a |"),
        &["different closed spaces", "{core}", "{val}"],
    );

    let input = "orbitals a\nspace core\noverlap | core^2 a | | a |\n";
    let run = derive("closed_none.spinfold", input);
    assert_reported(
        &run,
        "closed_none.spinfold",
        input,
        at(3, 1, "overlap | core^2 a | | a |"),
        &["different closed spaces", "{core}", "none"],
    );
}

#[test]
fn different_electron_counts_in_bra_and_ket() {
    let input = "orbitals a b\nelement | a b | | a |\n";
    let run = derive("count.spinfold", input);
    assert_reported(
        &run,
        "count.spinfold",
        input,
        at(2, 1, "element | a b | | a |"),
        &["different numbers of explicit electrons", "2", "1"],
    );
}

#[test]
fn wrong_number_of_operands() {
    let input = "orbitals a b\ndet X = | a |\nelement X\n";
    let run = derive("arity.spinfold", input);
    assert_reported(
        &run,
        "arity.spinfold",
        input,
        at(3, 1, "element X"),
        &["`element` takes 2 state(s), but 1 is given"],
    );

    let input = "orbitals a b\ndet X = | a |\nenergy X X\n";
    let run = derive("arity_energy.spinfold", input);
    assert_reported(
        &run,
        "arity_energy.spinfold",
        input,
        at(3, 1, "energy X X"),
        &["`energy` takes 1 state(s), but 2 are given"],
    );
}

#[test]
fn missing_input_file() {
    let dir = tempfile::tempdir().unwrap();
    let run = spinfold(dir.path(), &["derive", "missing.spinfold"]);
    assert_eq!(run.code, Some(2), "{}", run.stderr);
    assert!(run.stderr.starts_with("error: cannot use `missing.spinfold`: "), "{}", run.stderr);
    assert!(!run.stderr.contains("panicked"), "{}", run.stderr);
    assert!(run.stdout.is_empty());
}

fn derive_stdin(text: &str) -> Run {
    let mut child = Command::new(env!("CARGO_BIN_EXE_spinfold"))
        .args(["derive", "-", "--ascii"])
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("the binary runs");
    child.stdin.take().unwrap().write_all(text.as_bytes()).unwrap();
    child.wait_with_output().expect("the binary finishes").into()
}

#[test]
fn standard_input_with_dash() {
    let run = derive_stdin("orbitals a b\nenergy | a b' |\n");
    assert_eq!(run.code, Some(0), "{}", run.stderr);
    assert!(run.stdout.contains("= h_aa + h_bb + J_ab"), "{}", run.stdout);

    let input = "orbitals a\nenergy | a b |\n";
    let run = derive_stdin(input);
    assert_reported(&run, "<stdin>", input, at(2, 12, "b"), &["`b` is not defined"]);
}

const GOOD: &str = "orbitals a b\nspace core\ndet ab = | core^2 a b' |\ndet ba = | core^2 a' b |\n\
                    state S = (ab - ba)/sqrt(2)\nenergy S\nelement ab ba\n";

#[test]
fn output_file_is_not_created_by_a_failing_run() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("bad.spinfold"), "orbitals a\nenergy | a a |\n").unwrap();
    let run = spinfold(dir.path(), &["derive", "bad.spinfold", "-o", "out.txt"]);
    assert_eq!(run.code, Some(2), "{}", run.stderr);
    let left: Vec<String> = std::fs::read_dir(dir.path())
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    assert_eq!(left, vec!["bad.spinfold".to_string()], "nothing but the input is left behind");

    // an existing file is left as it was
    std::fs::write(dir.path().join("out.txt"), "earlier results\n").unwrap();
    let run = spinfold(dir.path(), &["derive", "bad.spinfold", "-o", "out.txt"]);
    assert_eq!(run.code, Some(2), "{}", run.stderr);
    assert_eq!(std::fs::read_to_string(dir.path().join("out.txt")).unwrap(), "earlier results\n");
}

#[test]
fn output_file_is_written_whole_on_success() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("good.spinfold"), GOOD).unwrap();
    for to in ["text", "latex", "json"] {
        let printed = spinfold(dir.path(), &["derive", "good.spinfold", "--to", to]);
        assert_eq!(printed.code, Some(0), "{}", printed.stderr);
        assert!(!printed.stdout.is_empty());
        std::fs::write(dir.path().join("out.txt"), "earlier results\n").unwrap();
        let written = spinfold(dir.path(), &["derive", "good.spinfold", "--to", to, "-o", "out.txt"]);
        assert_eq!(written.code, Some(0), "{}", written.stderr);
        assert!(written.stdout.is_empty(), "with -o nothing goes to standard output");
        let file = std::fs::read_to_string(dir.path().join("out.txt")).unwrap();
        assert_eq!(file, printed.stdout, "the file holds exactly what would be printed ({to})");
    }
    let mut left: Vec<String> = std::fs::read_dir(dir.path())
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    left.sort();
    assert_eq!(left, vec!["good.spinfold".to_string(), "out.txt".to_string()], "no temporary file is left");
}

/// The source line numbered `number` and the line of marks under it, as a report shows them
/// (the text after the gutter `│ `).
fn snippet(stderr: &str, number: usize) -> Option<(String, String)> {
    let lines: Vec<&str> = stderr.lines().collect();
    let k =
        lines.iter().position(|l| l.split_once('│').is_some_and(|(g, _)| g.trim() == number.to_string()))?;
    Some((after_gutter(lines[k])?.to_string(), after_gutter(lines.get(k + 1)?)?.to_string()))
}

/// Writes raw bytes as `name` in a fresh directory and runs `spinfold derive name`.
fn derive_bytes(name: &str, bytes: &[u8]) -> Run {
    let dir = tempfile::tempdir().expect("a temporary directory");
    std::fs::write(dir.path().join(name), bytes).expect("the input is written");
    spinfold(dir.path(), &["derive", name])
}

/// True when the text holds nothing a terminal would act on or hide: no control character
/// other than a line break, no character of no width.
fn printable(text: &str) -> bool {
    !text.chars().any(|c| {
        (c.is_control() && c != '\n')
            || matches!(c, '\u{ad}' | '\u{200b}'..='\u{200f}' | '\u{202a}'..='\u{202e}' | '\u{feff}')
            || ('\u{300}'..='\u{36f}').contains(&c)
    })
}

#[test]
fn characters_that_do_not_show_as_themselves_are_escaped_with_the_caret_under_them() {
    // (input, line, column counted in characters, the line as shown, the marks under it)
    let cases = [
        // a terminal escape sequence (red text) would recolour the terminal
        ("orbitals a\n\x1b[31menergy | a |\n", 2, 1, r"\u{1b}[31menergy | a |", "^^^^^^"),
        ("orbitals a\0 b\n", 1, 11, r"orbitals a\u{0} b", "          ^^^^^"),
        ("orbitals a b\nenergy | a b\x7f |\n", 2, 13, r"energy | a b\u{7f} |", "            ^^^^^^"),
        ("orbitals a\u{feff} b\n", 1, 11, r"orbitals a\u{feff} b", "          ^^^^^^^^"),
        ("orbitals a\u{200b} b\n", 1, 11, r"orbitals a\u{200b} b", "          ^^^^^^^^"),
        // a combining acute accent: the column counts it as a character of its own
        ("orbitals a\u{301} b\n", 1, 11, r"orbitals a\u{301} b", "          ^^^^^^^"),
        // a right-to-left override would reorder the rest of the line
        ("orbitals a\u{202e} b\n", 1, 11, r"orbitals a\u{202e} b", "          ^^^^^^^^"),
    ];
    for (input, line, column, shown, marks) in cases {
        let run = derive("odd.spinfold", input);
        assert_eq!(run.code, Some(2), "{input:?}: {}", run.stderr);
        assert!(
            run.stderr.starts_with(&format!("error: odd.spinfold:{line}:{column}: ")),
            "{input:?}:\n{}",
            run.stderr
        );
        assert!(printable(&run.stderr), "{input:?}: the report holds raw characters:\n{:?}", run.stderr);
        let (text, under) =
            snippet(&run.stderr, line).unwrap_or_else(|| panic!("a snippet:\n{}", run.stderr));
        assert_eq!(text, shown, "{input:?}:\n{}", run.stderr);
        assert!(
            under.starts_with(&format!("{marks} ")),
            "{input:?}: marks {marks:?} expected:\n{}",
            run.stderr
        );
    }
}

#[test]
fn a_carriage_return_alone_ends_a_line_as_in_the_grammar() {
    // (input, line, column, the line as shown, the marks under it, what the sentence says)
    let cases = [
        // an old Mac-style file: every line ends with `\r`
        (
            "orbitals a b\rspace core\renergy | a c |\r",
            3,
            12,
            "energy | a c |",
            "           ^ ",
            "`c` is not defined",
        ),
        // line endings of all three kinds in one file
        (
            "orbitals a b\r\nspace core\renergy | a c |\n",
            3,
            12,
            "energy | a c |",
            "           ^ ",
            "`c` is not defined",
        ),
        ("orbitals a b\rdet D = | a b\renergy D\r", 2, 14, "det D = | a b", "             ^ ", "closing `|`"),
        // a `\r` alone within a determinant ends its line, which leaves the determinant open
        ("orbitals a\r\nenergy | a\rb |\r\n", 2, 11, "energy | a", "          ^ ", "closing `|`"),
    ];
    for (input, line, column, shown, marks, says) in cases {
        let run = derive("mac.spinfold", input);
        assert_eq!(run.code, Some(2), "{input:?}: {}", run.stderr);
        assert!(
            run.stderr.starts_with(&format!("error: mac.spinfold:{line}:{column}: ")),
            "{input:?}:\n{}",
            run.stderr
        );
        assert!(run.stderr.lines().next().is_some_and(|l| l.contains(says)), "{input:?}:\n{}", run.stderr);
        assert!(printable(&run.stderr), "{input:?}: the report holds raw characters:\n{:?}", run.stderr);
        let (text, under) =
            snippet(&run.stderr, line).unwrap_or_else(|| panic!("a snippet:\n{}", run.stderr));
        assert_eq!(text, shown, "{input:?}:\n{}", run.stderr);
        assert!(under.starts_with(marks), "{input:?}: marks {marks:?} expected:\n{}", run.stderr);
    }
}

#[test]
fn a_wide_character_gets_a_caret_as_wide_as_itself() {
    let run = derive("wide.spinfold", "orbitals a b\nenergy | a \u{6f22} |\n");
    assert!(run.stderr.starts_with("error: wide.spinfold:2:12: "), "{}", run.stderr);
    let (text, under) = snippet(&run.stderr, 2).expect("a snippet");
    assert_eq!(text, "energy | a \u{6f22} |");
    assert!(
        under.starts_with("           ^^ "),
        "two columns marked under the wide character:\n{}",
        run.stderr
    );
}

#[test]
fn a_leading_byte_order_mark_is_ignored() {
    let input = "\u{feff}orbitals a b\nenergy | a b' |\n";
    let run = derive("bom.spinfold", input);
    assert_eq!(run.code, Some(0), "{}", run.stderr);
    assert!(run.stdout.contains("= h_aa + h_bb + J_ab"), "{}", run.stdout);
    // columns of the first line count from the first visible character
    let input = "\u{feff}orbitals a a\n";
    let run = derive("bom_twice.spinfold", input);
    assert_reported(&run, "bom_twice.spinfold", "orbitals a a\n", at(1, 12, "a"), &["`a` is defined twice"]);
}

#[test]
fn input_that_is_not_utf8_is_refused_at_its_first_bad_byte() {
    // a Latin-1 é (0xe9) in a comment after a UTF-8 é: byte 27 of line 2, character 26
    let run = derive_bytes("latin1.spinfold", b"orbitals a b\nenergy | a b | # caf\xc3\xa9 caf\xe9\n");
    assert_eq!(run.code, Some(2), "{}", run.stderr);
    let first = run.stderr.lines().next().unwrap_or("");
    assert!(first.starts_with("error: latin1.spinfold:2:26: "), "file, line and column:\n{}", run.stderr);
    assert!(
        first.contains("not UTF-8") && first.contains("byte 27 of line 2") && first.contains("0xe9"),
        "{}",
        run.stderr
    );
    assert!(!first.contains("stream did not contain"), "not the generic message:\n{}", run.stderr);
    assert!(run.stderr.contains("help: save the input as UTF-8"), "{}", run.stderr);
    let (_, under) = snippet(&run.stderr, 2).expect("a snippet");
    assert!(under.starts_with(&format!("{}^ ", " ".repeat(25))), "{}", run.stderr);
    // a byte-order mark does not count
    let run = derive_bytes("bom_latin1.spinfold", b"\xef\xbb\xbforbitals a\xff\n");
    assert!(run.stderr.starts_with("error: bom_latin1.spinfold:1:11: "), "{}", run.stderr);
    assert!(run.stderr.contains("byte 11 of line 1 (0xff)"), "{}", run.stderr);
}

#[test]
fn the_help_after_a_parse_error_lists_every_statement() {
    let input = "orbitals a b\ncfs X = | a b | S=0\n";
    let run = derive("statements.spinfold", input);
    assert_reported(&run, "statements.spinfold", input, at(2, 1, "c"), &["expected a statement"]);
    for keyword in
        ["orbitals", "space", "det", "state", "csf", "csfs", "energy", "element", "overlap", "spin"]
    {
        assert!(run.stderr.contains(&format!("`{keyword}`")), "{keyword}:\n{}", run.stderr);
    }
}

#[test]
fn parentheses_nested_too_deep_are_refused_before_parsing() {
    // 1800 levels overflowed the parser's stack and aborted the process
    let input = format!(
        "orbitals a b\ndet D = | a b |\nstate S = {}D{}\nenergy S\n",
        "(".repeat(1800),
        ")".repeat(1800)
    );
    let run = derive("deep.spinfold", &input);
    assert_reported(&run, "deep.spinfold", &input, at(3, 11 + 32, "("), &["33 nested levels", "limit of 32"]);
    assert!(run.stderr.contains("`state`"), "says how to avoid the nesting:\n{}", run.stderr);
}

#[test]
fn square_roots_nested_too_deep_are_refused_before_parsing() {
    let input = format!("orbitals a b\nstate S = {}1{} | a b |\n", "sqrt(".repeat(3000), ")".repeat(3000));
    let run = derive("roots.spinfold", &input);
    assert_reported(&run, "roots.spinfold", &input, at(2, 11 + 5 * 32 + 4, "("), &["limit of 32"]);
}

#[test]
fn a_parenthesis_in_a_comment_does_not_count() {
    let input = format!("orbitals a b # {}\ndet D = | a b |\nenergy ((D))\n", "(".repeat(100));
    let run = derive("comment.spinfold", &input);
    assert_eq!(run.code, Some(0), "{}", run.stderr);
}

#[test]
fn a_square_root_too_large_names_its_fixed_limit() {
    let input = "orbitals a b\nstate X = sqrt(99999999999/7) | a b |\n";
    let run = derive("big_root.spinfold", input);
    assert_reported(
        &run,
        "big_root.spinfold",
        input,
        at(2, 16, "99999999999/7"),
        &["p·q = 699999999993", "2^32"],
    );
    assert!(run.stderr.contains("no option changes this limit"), "{}", run.stderr);
    assert!(!run.stderr.contains("--max"), "no option to suggest:\n{}", run.stderr);
}

#[test]
fn an_option_given_twice_in_a_csf_is_refused_at_the_second() {
    for (line, column, second) in [
        ("csf X = | a b c | S=1/2 path=1/2,0,1/2 S=3/2", 40, "S=3/2"),
        ("csf X = | a b c | S=1/2 M=1/2 M=-1/2 path=1/2,0,1/2", 31, "M=-1/2"),
        ("csf X = | a b c | S=1/2 path=1/2,0,1/2 path=1/2,1,1/2", 40, "path=1/2,1,1/2"),
    ] {
        let input = format!("orbitals a b c\n{line}\nenergy X\n");
        let run = derive("twice.spinfold", &input);
        let option = second.split('=').next().unwrap();
        assert_reported(
            &run,
            "twice.spinfold",
            &input,
            at(2, column, second),
            &[&format!("`{option}=` is given twice")],
        );
        assert!(run.stderr.contains("first given here"), "{}", run.stderr);
    }
}

#[test]
fn a_csf_breaking_the_pauli_principle_is_reported_at_its_definition() {
    // i is a member of the closed space occ, so `occ^2 i` puts a third electron in it
    let input = "space occ: i\norbitals a\ncsf S = | occ^2 i a | S=0\nenergy S\n";
    let run = derive("pauli_csf.spinfold", input);
    assert_reported(
        &run,
        "pauli_csf.spinfold",
        input,
        at(3, 9, "| occ^2 i a |"),
        &["occupied twice", "Pauli"],
    );
}

/// Standard output and standard error that refuse every write.
#[cfg(unix)]
mod unwritable {
    use super::*;

    /// Runs `spinfold derive name` on `text` with standard output and standard error going to
    /// `stdout` and `stderr`; the exit code.
    fn derive_into(name: &str, text: &str, stdout: Stdio, stderr: Stdio) -> Option<i32> {
        let dir = tempfile::tempdir().expect("a temporary directory");
        std::fs::write(dir.path().join(name), text).expect("the input is written");
        Command::new(env!("CARGO_BIN_EXE_spinfold"))
            .args(["derive", name])
            .current_dir(dir.path())
            .stdin(Stdio::null())
            .stdout(stdout)
            .stderr(stderr)
            .status()
            .expect("the binary runs")
            .code()
    }

    /// A device that refuses every write as full.
    fn full() -> Stdio {
        std::fs::OpenOptions::new().write(true).open("/dev/full").expect("/dev/full opens").into()
    }

    /// A pipe nobody reads from any more.
    fn closed_pipe() -> Stdio {
        let (reader, writer) = std::io::pipe().expect("a pipe");
        drop(reader);
        writer.into()
    }

    #[test]
    fn an_error_report_that_cannot_be_written_keeps_its_exit_code() {
        let bad = "orbitals a\nenergy | a b |\n";
        assert_eq!(derive_into("bad.spinfold", bad, Stdio::null(), full()), Some(2));
        assert_eq!(derive_into("bad.spinfold", bad, Stdio::null(), closed_pipe()), Some(2));
        // results that cannot be written are an error too, whose report cannot be written either
        assert_eq!(derive_into("good.spinfold", GOOD, full(), full()), Some(2));
        assert_eq!(derive_into("good.spinfold", GOOD, closed_pipe(), closed_pipe()), Some(2));
    }
}

#[test]
fn undecodable_bytes_in_a_file_of_carriage_returns_are_placed_on_the_right_line() {
    // lines separated by a lone carriage return, as the grammar reads them
    let run = derive_bytes("cr_latin1.spinfold", b"orbitals a\rdet d = | a |\renergy d \xe9\r");
    assert_eq!(run.code, Some(2), "{}", run.stderr);
    assert!(run.stderr.starts_with("error: cr_latin1.spinfold:3:10: "), "{}", run.stderr);
    assert!(run.stderr.contains("byte 10 of line 3 (0xe9)"), "{}", run.stderr);
}
