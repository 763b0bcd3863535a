//! `heldout completions` and `heldout manual`: derived from the clap
//! definitions, they must know every command, and `--help` must say what the
//! command does with the spec's report formats.

use clap::CommandFactory;

use crate::util;

/// The names of heldout's commands, as clap defines them.
fn command_names() -> Vec<String> {
    let names: Vec<String> = heldout::cli::Cli::command()
        .get_subcommands()
        .map(|c| c.get_name().to_owned())
        .collect();
    // Guard against a listing that went empty and would pass every check.
    for expected in ["run", "verify", "plan", "report", "completions", "manual"] {
        assert!(names.iter().any(|n| n == expected), "{names:?}");
    }
    names
}

/// Stdout of `heldout <args>`, which must succeed with an empty stderr.
fn stdout_ok(args: &[&str]) -> String {
    let output = util::run_in(&util::crate_root(), args);
    util::assert_success(&output);
    assert_eq!(util::stderr_of(&output), "", "{args:?}");
    util::stdout_of(&output)
}

#[test]
fn completion_scripts_know_every_command() {
    let names = command_names();
    for (shell, marker) in [
        ("bash", "complete -F"),
        ("zsh", "#compdef heldout"),
        ("fish", "complete -c heldout"),
    ] {
        let script = stdout_ok(&["completions", shell]);
        assert!(script.contains(marker), "{shell} script:\n{script}");
        for name in &names {
            assert!(
                script.contains(name.as_str()),
                "the {shell} script does not mention `{name}`"
            );
        }
    }
    // The spec's options are completed too, not only the command names.
    assert!(stdout_ok(&["completions", "fish"]).contains("trust-cache"));
}

#[test]
fn an_unknown_shell_is_bad_input() {
    let output = util::run_in(&util::crate_root(), &["completions", "tcsh"]);
    assert_eq!(output.status.code(), Some(2));
    assert!(util::stderr_of(&output).contains("tcsh"));
}

#[test]
fn manual_page_is_roff_that_lists_every_command() {
    let page = stdout_ok(&["manual"]);
    assert!(page.starts_with(".TH heldout 1 "), "{page}");
    for section in [
        ".SH NAME",
        ".SH SYNOPSIS",
        ".SH SUBCOMMANDS",
        ".SH EXAMPLES",
    ] {
        assert!(page.contains(section), "{section} missing:\n{page}");
    }
    for name in command_names() {
        assert!(
            page.contains(&format!("heldout\\-{name}(1)")),
            "the manual does not list `{name}`:\n{page}"
        );
    }
    // Every line is text or a roff request; none is a stray escape.
    for line in page.lines() {
        assert!(
            !line.starts_with('\'') && !line.starts_with("\\\""),
            "{line}"
        );
    }
}

#[test]
fn each_command_has_its_own_manual_page_with_its_example() {
    for name in command_names().iter().filter(|n| *n != "help") {
        let page = stdout_ok(&["manual", name]);
        assert!(
            page.starts_with(&format!(".TH heldout-{name} 1 ")),
            "{name}:\n{page}"
        );
        assert!(page.contains("Example"), "{name} page has no example");
    }
}

#[test]
fn manual_for_an_unknown_command_names_the_commands() {
    let output = util::run_in(&util::crate_root(), &["manual", "fit"]);
    assert_eq!(output.status.code(), Some(2));
    let stderr = util::stderr_of(&output);
    assert!(
        stderr.contains("heldout manual fit: no such command") && stderr.contains("verify"),
        "{stderr}"
    );
}

#[test]
fn run_help_says_when_html_reports_are_written() {
    let help = stdout_ok(&["run", "--help"]);
    let flat = help.split_whitespace().collect::<Vec<_>>().join(" ");
    assert!(
        flat.contains(
            "report.html is written too when the spec's [report] formats includes \"html\""
        ),
        "{help}"
    );
}
