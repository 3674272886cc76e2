//! The README's example commands run as written (in a fresh folder holding a copy of `data/`),
//! and every printed output the README shows is what the command prints, number by number, so
//! the documentation cannot drift from the tool. A `text` block starts with `$ tunnelcast …`
//! and shows (an excerpt of) its output; each shown line must appear in the real output, in
//! order, with the same words and the same numbers. A command whose input file is a
//! placeholder (a name that neither `data/` nor an earlier example provides) is skipped.

mod shell;
use shell::tunnelcast;

/// One README example: the command line (continuations joined) and, for a `text` block, the
/// output lines it shows.
#[derive(Debug)]
struct Example {
    command: String,
    shown: Option<Vec<String>>,
}

/// The `tunnelcast …` examples of the README's `sh` and `text` blocks, in order.
fn readme_examples() -> Vec<Example> {
    let readme = include_str!("../README.md");
    let mut examples = Vec::new();
    let mut block: Option<&str> = None;
    let mut pending = String::new();
    for line in readme.lines() {
        if line.starts_with("```") {
            block = match block {
                Some(_) => None,
                None => Some(line.trim_start_matches("```")),
            };
            continue;
        }
        let Some(kind) = block else { continue };
        if kind != "sh" && kind != "text" {
            continue;
        }
        let trimmed = line.trim();
        // A command: `tunnelcast …` in a `sh` block, `$ tunnelcast …` in a `text` block (where
        // a line without `$ ` is output, even if it starts with the tool's name).
        let starts = match kind {
            "sh" => trimmed.starts_with("tunnelcast "),
            _ => trimmed.starts_with("$ tunnelcast "),
        };
        if !pending.is_empty() || starts {
            let part = trimmed.strip_prefix("$ ").unwrap_or(trimmed);
            match part.strip_suffix('\\') {
                Some(head) => pending.push_str(head),
                None => {
                    pending.push_str(part);
                    examples.push(Example {
                        command: std::mem::take(&mut pending),
                        shown: (kind == "text").then(Vec::new),
                    });
                }
            }
            continue;
        }
        match (kind, examples.last_mut()) {
            (
                "text",
                Some(Example {
                    shown: Some(lines), ..
                }),
            ) => lines.push(line.to_string()),
            ("text", _) => {
                panic!("README text block shows output without a `$ tunnelcast` command: {line}")
            }
            _ => {}
        }
    }
    examples
}

/// Splits a command line into words, honouring double quotes.
fn words(command: &str) -> Vec<String> {
    let mut out = Vec::new();
    let mut word = String::new();
    let mut quoted = false;
    let mut started = false;
    for c in command.chars() {
        match c {
            '"' => {
                quoted = !quoted;
                started = true;
            }
            ' ' if !quoted => {
                if started {
                    out.push(std::mem::take(&mut word));
                    started = false;
                }
            }
            _ => {
                word.push(c);
                started = true;
            }
        }
    }
    if started {
        out.push(word);
    }
    out
}

/// A line split into its words (numbers replaced by `#`, spaces collapsed) and its numbers as
/// written. A number is `-?digits[.digits][e±digits]` not glued to a word (`c0`, `ln_shape`
/// and `spline-ph-2` stay words).
fn skeleton(line: &str) -> (String, Vec<String>) {
    let chars: Vec<char> = line.chars().collect();
    let mut words = String::new();
    let mut numbers = Vec::new();
    let mut i = 0;
    while i < chars.len() {
        let glued = i > 0 && (chars[i - 1].is_alphanumeric() || "_.-".contains(chars[i - 1]));
        let sign = chars[i] == '-' && chars.get(i + 1).is_some_and(char::is_ascii_digit);
        if !glued && (chars[i].is_ascii_digit() || sign) {
            let start = i;
            i += 1;
            while i < chars.len() && chars[i].is_ascii_digit() {
                i += 1;
            }
            if chars.get(i) == Some(&'.') && chars.get(i + 1).is_some_and(char::is_ascii_digit) {
                i += 1;
                while i < chars.len() && chars[i].is_ascii_digit() {
                    i += 1;
                }
            }
            if matches!(chars.get(i), Some('e' | 'E')) {
                let mut j = i + 1;
                if matches!(chars.get(j), Some('-' | '+')) {
                    j += 1;
                }
                if chars.get(j).is_some_and(char::is_ascii_digit) {
                    i = j;
                    while i < chars.len() && chars[i].is_ascii_digit() {
                        i += 1;
                    }
                }
            }
            let glued_after = chars.get(i).is_some_and(|c| c.is_alphabetic() || *c == '_');
            if !glued_after {
                numbers.push(chars[start..i].iter().collect());
                words.push('#');
                continue;
            }
            words.extend(&chars[start..i]);
            continue;
        }
        words.push(chars[i]);
        i += 1;
    }
    let words = words.split_whitespace().collect::<Vec<_>>().join(" ");
    (words, numbers)
}

/// One unit in the last digit of a number as written (`0.0417` → 1e-4, `8.43e-5` → 1e-7).
fn last_digit(text: &str) -> f64 {
    let (mantissa, exponent) = match text.split_once(['e', 'E']) {
        Some((m, e)) => (m, e.parse::<i32>().unwrap()),
        None => (text, 0),
    };
    let decimals = mantissa.split_once('.').map_or(0, |(_, d)| d.len()) as i32;
    10f64.powi(exponent - decimals)
}

/// Whether a number the README shows agrees with the one printed: the same text, or, for a
/// number with decimals, within one unit of the README's last digit (room for the last digit
/// of an optimum that a different processor or library rounds the other way). Whole numbers
/// (counts, sizes) must be equal.
fn same_number(shown: &str, printed: &str) -> bool {
    if shown == printed {
        return true;
    }
    if !shown.contains(['.', 'e', 'E']) {
        return false;
    }
    match (shown.parse::<f64>(), printed.parse::<f64>()) {
        (Ok(a), Ok(b)) => (a - b).abs() <= last_digit(shown) * (1.0 + 1e-9),
        _ => false,
    }
}

/// Checks that every shown line appears in `printed`, in order, with the same words and numbers.
fn compare(command: &str, shown: &[String], printed: &str) {
    let printed: Vec<(String, Vec<String>, &str)> = printed
        .lines()
        .map(|l| {
            let (w, n) = skeleton(l);
            (w, n, l)
        })
        .collect();
    let mut from = 0;
    let mut compared = 0;
    for line in shown.iter().filter(|l| !l.trim().is_empty()) {
        let (words, numbers) = skeleton(line);
        let Some(offset) = printed[from..].iter().position(|(w, _, _)| *w == words) else {
            panic!(
                "README output of `{command}` not printed (in this order):\n  README: {line}\n  printed:\n{}",
                printed.iter().map(|p| format!("    {}", p.2)).collect::<Vec<_>>().join("\n")
            );
        };
        let (_, got, text) = &printed[from + offset];
        for (a, b) in numbers.iter().zip(got) {
            assert!(
                same_number(a, b),
                "README shows {a} where `{command}` prints {b}:\n  README:  {line}\n  printed: {text}"
            );
        }
        from += offset + 1;
        compared += 1;
    }
    assert!(compared > 0, "no output lines shown for `{command}`");
}

/// Copies `from` into `to`, recursively.
fn copy_dir(from: &std::path::Path, to: &std::path::Path) {
    std::fs::create_dir_all(to).unwrap();
    for entry in std::fs::read_dir(from).unwrap() {
        let entry = entry.unwrap();
        let target = to.join(entry.file_name());
        if entry.file_type().unwrap().is_dir() {
            copy_dir(&entry.path(), &target);
        } else {
            std::fs::copy(entry.path(), target).unwrap();
        }
    }
}

#[test]
fn the_comparison_catches_a_changed_number_or_word() {
    // The check below is only as good as this comparison.
    let printed =
        "stable_count: 12 (first)\nmethod  life_years\nstart  1.24732  8.43e-5  -0.0417\n";
    let shown = |s: &str| vec![s.to_string()];
    compare("x", &shown("start 1.24732 8.43e-5 -0.0417"), printed);
    compare("x", &shown("start 1.24733 8.43e-5 -0.0417"), printed);
    for wrong in [
        "start 1.24734 8.43e-5 -0.0417",
        "start 1.24732 8.45e-5 -0.0417",
        "start 1.24732 8.43e-5 0.0417",
        "stable_count: 13 (first)",
        "stable_count: 12 (last)",
    ] {
        let caught = std::panic::catch_unwind(|| compare("x", &shown(wrong), printed));
        assert!(caught.is_err(), "not caught: {wrong}");
    }
    assert_eq!(
        skeleton("spline-ph-2 c0 -3.7 (95% CI"),
        (
            "spline-ph-2 c0 # (#% CI".to_string(),
            vec!["-3.7".to_string(), "95".to_string()]
        )
    );
}

#[test]
fn readme_examples_run_as_written_and_print_what_the_readme_shows() {
    let dir = tempfile::tempdir().unwrap();
    copy_dir(
        &std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("data"),
        &dir.path().join("data"),
    );
    let examples = readme_examples();
    assert!(examples.len() >= 8, "README commands found: {examples:?}");
    let mut ran = 0;
    let mut compared = Vec::new();
    for example in &examples {
        let command = &example.command;
        let args = words(command);
        // Inputs: words naming a data or analysis file that are not the value of an output option.
        let missing_input = args.windows(2).any(|w| {
            let output_option =
                ["--out", "--json", "--summary-out", "--plot", "--plots"].contains(&w[0].as_str());
            let file = w[1].ends_with(".csv") || w[1].ends_with(".toml");
            !output_option && file && !dir.path().join(&w[1]).exists()
        });
        assert!(
            !(missing_input && example.shown.is_some()),
            "README shows the output of a command that cannot run as written: {command}"
        );
        if missing_input {
            continue;
        }
        let mut run = tunnelcast(dir.path());
        run.args(&args[1..]);
        // Examples may write files an earlier example wrote (fit.json): allow replacing them.
        if args.iter().any(|a| a == "--out" || a == "--json") && args[1] != "run" {
            run.arg("--force");
        }
        let out = run.output().unwrap();
        let stderr = String::from_utf8_lossy(&out.stderr);
        assert!(
            out.status.success(),
            "README command failed: {command}\n{stderr}"
        );
        assert!(!stderr.contains("panicked"), "{command}\n{stderr}");
        if let Some(shown) = &example.shown {
            compare(command, shown, &String::from_utf8_lossy(&out.stdout));
            compared.push(args[1].clone());
        }
        ran += 1;
    }
    assert!(
        ran >= 8,
        "only {ran} of {} README commands ran",
        examples.len()
    );
    // The printed examples of fit, tunnels, horizon and a whole analysis are all checked.
    for command in ["fit", "tunnels", "horizon", "run"] {
        assert!(
            compared.iter().any(|c| c == command),
            "no README output of `{command}` was compared: {compared:?}"
        );
    }
}
