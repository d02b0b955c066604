//! Keeps the documentation and the command line in step (a "tidy" check).
//!
//! The reference is the program itself: `ebbwise --help` lists the commands and
//! `ebbwise <command> --help` each command's options, as clap prints them. The documents read
//! are README.md, DEVELOPERS.md, every `docs/*.md` and the demo's README.
//!
//! * **What the documents show exists.** Every `ebbwise <command> …` written in a shell block
//!   (```` ```sh ````) or an inline code span names a command the program has, and every `--option`
//!   after it is one of that command's options. An option written alone in a code span (an
//!   options table) is checked against the commands named in the heading of its section.
//! * **What the program has is documented.** `docs/cli.md` has a section for every command, and
//!   that section names every option the command's `--help` lists.
//!
//! Removing an option from the program, or documenting one it does not have, fails this test
//! with the file and line of the mention.

use std::collections::{BTreeMap, BTreeSet};
use std::path::PathBuf;

use super::{ebbwise, repo};

/// Options every command has (clap's own).
const CLAP_OWN: [&str; 2] = ["--help", "--version"];

/// A command's name and aliases, and its options.
struct Cli {
    /// Command name (and visible aliases) → its long options.
    commands: BTreeMap<String, BTreeSet<String>>,
    /// Canonical names only, in help order.
    canonical: Vec<String>,
}

/// Long options in a clap help text: the first `--word` of each option line.
fn options_in_help(help: &str) -> BTreeSet<String> {
    let mut out = BTreeSet::new();
    for line in help.lines() {
        let t = line.trim_start();
        if !t.starts_with('-') {
            continue;
        }
        if let Some(i) = t.find("--") {
            let name: String = t[i..]
                .chars()
                .take_while(|c| c.is_ascii_alphanumeric() || *c == '-')
                .collect();
            if name.len() > 2 {
                out.insert(name);
            }
        }
    }
    out
}

fn help_of(args: &[&str]) -> String {
    let o = ebbwise(args);
    assert!(
        o.status.success(),
        "`ebbwise {}` exits {:?}: {}",
        args.join(" "),
        o.status.code(),
        String::from_utf8_lossy(&o.stderr)
    );
    String::from_utf8_lossy(&o.stdout).into_owned()
}

/// Reads the program's commands and options from its help.
/// The subcommands listed under "Commands:" in a help text (clap's own `help` left out).
fn subcommands_in_help(help: &str) -> Vec<String> {
    let mut out = Vec::new();
    let mut inside = false;
    for line in help.lines() {
        if line.starts_with("Commands:") {
            inside = true;
            continue;
        }
        if inside {
            if !line.starts_with("  ") {
                break;
            }
            let name = line.split_whitespace().next().unwrap_or("").to_string();
            if !name.is_empty() && name != "help" {
                out.push(name);
            }
        }
    }
    out
}

fn cli() -> Cli {
    let top = help_of(&["--help"]);
    let mut commands = BTreeMap::new();
    let mut canonical = Vec::new();
    let mut in_commands = false;
    for line in top.lines() {
        if line.starts_with("Commands:") {
            in_commands = true;
            continue;
        }
        if in_commands {
            if !line.starts_with("  ") {
                in_commands = false;
                continue;
            }
            let name = line.split_whitespace().next().unwrap().to_string();
            let own_help = help_of(&[&name, "--help"]);
            let mut options = options_in_help(&own_help);
            // A command with subcommands (`ebbwise zones derive`): its options are those of
            // every subcommand, documented in the command's one section.
            for sub in subcommands_in_help(&own_help) {
                options.extend(options_in_help(&help_of(&[&name, &sub, "--help"])));
            }
            options.extend(CLAP_OWN.iter().map(|s| s.to_string()));
            // clap shows visible aliases as "[alias: analyze]" or "[aliases: a, b]".
            let alias_at = line
                .find("[alias: ")
                .map(|i| i + 8)
                .or_else(|| line.find("[aliases: ").map(|i| i + 10));
            if let Some(i) = alias_at {
                let rest = &line[i..];
                for alias in rest.trim_end_matches(']').split(", ") {
                    commands.insert(alias.trim().to_string(), options.clone());
                }
            }
            canonical.push(name.clone());
            commands.insert(name, options);
        }
    }
    assert!(
        canonical.len() >= 8,
        "expected at least 8 commands in `ebbwise --help`, found {canonical:?}"
    );
    Cli {
        commands,
        canonical,
    }
}

/// One piece of code in a document: its text, file and line, and the commands named in the
/// heading of its section.
struct CodeText {
    text: String,
    /// The span follows "no" or "without": it says the option is absent.
    negated: bool,
    file: String,
    line: usize,
    section_commands: Vec<String>,
}

fn documents() -> Vec<PathBuf> {
    let root = repo();
    let mut files = vec![
        root.join("README.md"),
        root.join("DEVELOPERS.md"),
        root.join("zoning-demo/README.md"),
    ];
    let mut docs: Vec<PathBuf> = std::fs::read_dir(root.join("docs"))
        .unwrap()
        .filter_map(Result::ok)
        .map(|e| e.path())
        .filter(|p| p.extension().is_some_and(|x| x == "md"))
        .collect();
    docs.sort();
    files.extend(docs);
    files
}

/// `ebbwise <word>` commands named in a line of text (a heading).
fn commands_named(text: &str) -> Vec<String> {
    let mut out = Vec::new();
    let mut rest = text;
    while let Some(i) = rest.find("ebbwise ") {
        let after = &rest[i + 8..];
        let word: String = after
            .trim_start()
            .chars()
            .take_while(|c| c.is_ascii_lowercase() || *c == '-')
            .collect();
        if !word.is_empty() && !word.starts_with('-') {
            out.push(word);
        }
        rest = after;
    }
    out
}

/// The shell lines (backslash continuations joined) and inline code spans of a Markdown file.
fn code_texts(file: &PathBuf) -> Vec<CodeText> {
    let name = file
        .strip_prefix(repo())
        .unwrap()
        .to_string_lossy()
        .into_owned();
    let src = std::fs::read_to_string(file).unwrap_or_else(|e| panic!("{name}: {e}"));
    let mut out = Vec::new();
    let mut fence: Option<bool> = None; // Some(is_shell) inside a fenced block
    let mut section_commands = Vec::new();
    let mut pending: Option<(String, usize)> = None;
    for (i, line) in src.lines().enumerate() {
        let n = i + 1;
        let t = line.trim_start();
        if t.starts_with("```") {
            fence = match fence {
                Some(_) => None,
                None => {
                    let lang = t.trim_start_matches('`').trim();
                    Some(matches!(lang, "sh" | "bash" | "shell" | "console"))
                }
            };
            continue;
        }
        match fence {
            Some(true) => {
                let (mut text, start) = pending.take().unwrap_or((String::new(), n));
                // A comment is prose, not part of the command.
                let code = match line.find(" #") {
                    Some(j) => &line[..j],
                    None => line,
                };
                text.push_str(code.trim_end_matches('\\'));
                text.push(' ');
                if code.trim_end().ends_with('\\') {
                    pending = Some((text, start));
                } else {
                    out.push(CodeText {
                        text,
                        negated: false,
                        file: name.clone(),
                        line: start,
                        section_commands: section_commands.clone(),
                    });
                }
            }
            Some(false) => {}
            None => {
                if t.starts_with('#') {
                    section_commands = commands_named(t);
                }
                let parts: Vec<&str> = line.split('`').collect();
                for (k, part) in parts.iter().enumerate() {
                    if k % 2 == 1 && k + 1 < parts.len() {
                        let before = parts[k - 1].trim_end().to_lowercase();
                        let negated = before.ends_with(" no")
                            || before.ends_with("(no")
                            || before == "no"
                            || before.ends_with("without")
                            || before.ends_with("(without");
                        out.push(CodeText {
                            text: part.to_string(),
                            negated,
                            file: name.clone(),
                            line: n,
                            section_commands: section_commands.clone(),
                        });
                    }
                }
            }
        }
    }
    out
}

/// Long options written in a piece of code, each with the `ebbwise` command it follows, if any.
/// Other programs' invocations (cargo, pip, python3, bash, git) end the command's scope.
fn mentions(text: &str) -> Vec<(Option<String>, Option<String>)> {
    let mut out = Vec::new();
    let mut command: Option<String> = None;
    let mut other_program = false;
    let tokens: Vec<&str> = text
        .split(|c: char| c.is_whitespace() || "|;()[]`,".contains(c))
        .filter(|s| !s.is_empty())
        .collect();
    let mut k = 0;
    while k < tokens.len() {
        let tok = tokens[k];
        let bin = tok.rsplit('/').next().unwrap_or(tok);
        if bin == "ebbwise" {
            other_program = false;
            command = None;
            if let Some(next) = tokens.get(k + 1) {
                if !next.starts_with('-') && next.chars().all(|c| c.is_ascii_lowercase()) {
                    command = Some(next.to_string());
                    out.push((command.clone(), None));
                    k += 1;
                }
            }
        } else if tok == "&&" {
            command = None;
            other_program = false;
        } else if matches!(
            bin,
            "cargo" | "pip" | "python3" | "python" | "bash" | "git" | "rustup" | "apt-get"
        ) {
            command = None;
            other_program = true;
        } else if let Some(stripped) = tok.strip_prefix("--") {
            let name: String = stripped
                .chars()
                .take_while(|c| c.is_ascii_alphanumeric() || *c == '-')
                .collect();
            if !name.is_empty() && !other_program {
                out.push((command.clone(), Some(format!("--{name}"))));
            }
        }
        k += 1;
    }
    out
}

#[test]
fn every_command_and_option_the_documents_show_exists() {
    let cli = cli();
    let mut problems = Vec::new();
    for file in documents() {
        for code in code_texts(&file) {
            for (command, option) in mentions(&code.text) {
                let at = format!("{}:{}", code.file, code.line);
                match (command, option) {
                    (Some(c), None) => {
                        if !cli.commands.contains_key(&c) {
                            problems.push(format!("{at}: `ebbwise {c}`: no such command"));
                        }
                    }
                    (Some(c), Some(o)) => match cli.commands.get(&c) {
                        Some(opts) if !opts.contains(&o) => {
                            problems.push(format!("{at}: `ebbwise {c}` has no option {o}"))
                        }
                        _ => {}
                    },
                    (None, Some(o)) => {
                        // An option alone (an options table, a sentence): it belongs to the
                        // commands named in the heading of its section. Outside such sections
                        // (benches, cargo) and where the text says the option is absent ("no
                        // `--order`"), it is not attributed to any command.
                        let scope: Vec<&String> = code
                            .section_commands
                            .iter()
                            .filter(|c| cli.commands.contains_key(*c))
                            .collect();
                        if !scope.is_empty()
                            && !code.negated
                            && !scope.iter().any(|c| cli.commands[*c].contains(&o))
                        {
                            problems.push(format!(
                                "{at}: option {o} is not an option of {}",
                                scope
                                    .iter()
                                    .map(|c| format!("`ebbwise {c}`"))
                                    .collect::<Vec<_>>()
                                    .join(" or ")
                            ));
                        }
                    }
                    (None, None) => {}
                }
            }
        }
    }
    assert!(
        problems.is_empty(),
        "the documents show what the program does not have:\n{}",
        problems.join("\n")
    );
}

#[test]
fn every_option_of_every_command_is_in_the_command_reference() {
    let cli = cli();
    let reference = repo().join("docs/cli.md");
    let text = std::fs::read_to_string(&reference).expect("docs/cli.md");
    // Sections "## `ebbwise <command>`": the code of each section.
    let mut sections: BTreeMap<String, String> = BTreeMap::new();
    let mut current: Option<String> = None;
    for line in text.lines() {
        if let Some(h) = line.strip_prefix("## ") {
            current = commands_named(h).into_iter().next();
            if let Some(c) = &current {
                sections.entry(c.clone()).or_default();
            }
            continue;
        }
        if let Some(c) = &current {
            let s = sections.get_mut(c).unwrap();
            s.push_str(line);
            s.push('\n');
        }
    }
    let mut problems = Vec::new();
    for command in &cli.canonical {
        let Some(section) = sections.get(command) else {
            problems.push(format!(
                "docs/cli.md has no section \"## `ebbwise {command}`\""
            ));
            continue;
        };
        let documented: BTreeSet<String> = mentions(section)
            .into_iter()
            .filter_map(|(_, o)| o)
            .collect();
        for option in &cli.commands[command] {
            if CLAP_OWN.contains(&option.as_str()) {
                continue;
            }
            if !documented.contains(option) {
                problems.push(format!(
                    "docs/cli.md, section `ebbwise {command}`: option {option} (in `ebbwise {command} --help`) is not documented"
                ));
            }
        }
    }
    assert!(
        problems.is_empty(),
        "the command reference misses what the program has:\n{}",
        problems.join("\n")
    );
}

#[test]
fn help_texts_are_read_as_the_checks_expect() {
    // The two checks above parse clap's help layout; if that layout changed they could pass
    // while reading nothing. Hold them to what the program is known to have (its definition in
    // src/cli): `reduce` takes --out and --threads, `predict` --from and --to.
    let cli = cli();
    for (command, option) in [
        ("reduce", "--out"),
        ("reduce", "--threads"),
        ("predict", "--from"),
        ("predict", "--to"),
        ("check", "--json"),
        ("analyze", "--nodal"),
    ] {
        assert!(
            cli.commands[command].contains(option),
            "`ebbwise {command} --help` read without {option}: {:?}",
            cli.commands[command]
        );
    }
    // And the document reader finds the README's shell commands.
    let readme = code_texts(&repo().join("README.md"));
    assert!(
        readme
            .iter()
            .any(|c| mentions(&c.text).contains(&(Some("reduce".into()), None))),
        "no `ebbwise reduce` found in README.md"
    );
}
