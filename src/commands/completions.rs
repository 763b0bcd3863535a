//! `heldout completions` and `heldout manual`: a shell completion script and
//! manual pages, both derived from the clap definitions in `cli`, so they can
//! never disagree with `--help`.

use std::io::Write as _;

use anyhow::Context;
use clap::CommandFactory;

use crate::cli::{Cli, CompletionShell, CompletionsArgs, ManualArgs};
use crate::error::UsageError;

/// Writes the completion script for one shell on stdout.
pub(crate) fn completions(args: &CompletionsArgs) -> anyhow::Result<()> {
    let shell = match args.shell {
        CompletionShell::Bash => clap_complete::Shell::Bash,
        CompletionShell::Zsh => clap_complete::Shell::Zsh,
        CompletionShell::Fish => clap_complete::Shell::Fish,
    };
    let mut script = Vec::new();
    clap_complete::generate(shell, &mut Cli::command(), "heldout", &mut script);
    write_stdout(&script)
}

/// Writes heldout(1), or the page of one command (heldout-run(1), …), on stdout.
pub(crate) fn manual(args: &ManualArgs) -> anyhow::Result<()> {
    let mut top = Cli::command();
    // Building fills in what the page shows: the version, and each
    // command's display name `heldout-<command>`, which titles its page.
    top.build();
    let page = match &args.command {
        None => top,
        Some(name) => top.find_subcommand(name).cloned().ok_or_else(|| {
            let known: Vec<&str> = top.get_subcommands().map(|c| c.get_name()).collect();
            UsageError(format!(
                "heldout manual {name}: no such command; the commands are {}",
                known.join(", ")
            ))
        })?,
    };
    let mut roff = Vec::new();
    clap_mangen::Man::new(page)
        .source(format!("heldout {}", env!("CARGO_PKG_VERSION")))
        .render(&mut roff)
        .context("cannot render the manual page")?;
    let roff = String::from_utf8(roff).context("the manual page is not UTF-8")?;
    write_stdout(conventional_layout(&roff).as_bytes())
}

/// The page with its `.TH` title request on the first line, where `man`,
/// `file` and `mandb` look for it (the renderer puts a string definition for
/// apostrophes first, which works as well after the title), and the
/// after-help text named for what it holds, each command's example, and
/// kept in its lines (no filling), as `--help` shows it: commands and
/// their explanation must not run together.
fn conventional_layout(roff: &str) -> String {
    let mut title = String::new();
    let mut rest = String::new();
    let mut unfilled = false;
    for line in roff.split_inclusive('\n') {
        if title.is_empty() && line.starts_with(".TH ") {
            title.push_str(line);
            continue;
        }
        if line.starts_with(".SH ") && unfilled {
            rest.push_str(".fi\n");
            unfilled = false;
        }
        if line.trim_end() == ".SH EXTRA" {
            rest.push_str(".SH EXAMPLES\n.nf\n");
            unfilled = true;
        } else {
            rest.push_str(line);
        }
    }
    if unfilled {
        rest.push_str(".fi\n");
    }
    title + &rest
}

fn write_stdout(bytes: &[u8]) -> anyhow::Result<()> {
    std::io::stdout()
        .write_all(bytes)
        .context("cannot write to standard output")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn title_comes_first_and_examples_keep_their_lines() {
        let rendered = ".ie \\n(.g .ds Aq \\(aq\n.el .ds Aq '\n.TH heldout 1\n.SH NAME\n\
                        heldout\n.SH EXTRA\nExample:\n  heldout run a.toml\n";
        assert_eq!(
            conventional_layout(rendered),
            ".TH heldout 1\n.ie \\n(.g .ds Aq \\(aq\n.el .ds Aq '\n.SH NAME\nheldout\n\
             .SH EXAMPLES\n.nf\nExample:\n  heldout run a.toml\n.fi\n"
        );
        // A section after the examples is filled again.
        let later = ".TH t 1\n.SH EXTRA\nx\n.SH VERSION\nv1\n";
        assert_eq!(
            conventional_layout(later),
            ".TH t 1\n.SH EXAMPLES\n.nf\nx\n.fi\n.SH VERSION\nv1\n"
        );
    }
}
