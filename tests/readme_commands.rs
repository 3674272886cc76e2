//! The README's example commands run as written (in a fresh folder holding a copy of `data/`),
//! so the documentation cannot drift from the command line. A command whose input file is a
//! placeholder (a name that neither `data/` nor an earlier example provides) is skipped.

mod shell;
use shell::tunnelcast;

/// `tunnelcast …` lines of the README's `sh` and `text` blocks, continuation lines joined.
fn readme_commands() -> Vec<String> {
    let readme = include_str!("../README.md");
    let mut commands = Vec::new();
    let mut in_block = false;
    let mut pending = String::new();
    for line in readme.lines() {
        if line.starts_with("```") {
            in_block = !in_block && (line == "```sh" || line == "```text");
            continue;
        }
        if !in_block {
            continue;
        }
        let line = line.trim().trim_start_matches("$ ");
        if pending.is_empty() && !line.starts_with("tunnelcast ") {
            continue;
        }
        match line.strip_suffix('\\') {
            Some(head) => pending.push_str(head),
            None => {
                pending.push_str(line);
                commands.push(std::mem::take(&mut pending));
            }
        }
    }
    commands
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
fn readme_examples_run_as_written() {
    let dir = tempfile::tempdir().unwrap();
    copy_dir(
        &std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("data"),
        &dir.path().join("data"),
    );
    let commands = readme_commands();
    assert!(commands.len() >= 8, "README commands found: {commands:?}");
    let mut ran = 0;
    for command in &commands {
        let args = words(command);
        // Inputs: words naming a data or analysis file that are not the value of an output option.
        let missing_input = args.windows(2).any(|w| {
            let output_option =
                ["--out", "--json", "--summary-out", "--plot", "--plots"].contains(&w[0].as_str());
            let file = w[1].ends_with(".csv") || w[1].ends_with(".toml");
            !output_option && file && !dir.path().join(&w[1]).exists()
        });
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
        ran += 1;
    }
    assert!(
        ran >= 8,
        "only {ran} of {} README commands ran",
        commands.len()
    );
}
