//! The CI recipe in `docs/ci.md` against the tool: its YAML parses, it keeps
//! the fit cache and the reports, and every `heldout` command it runs, with
//! every flag, is one `heldout --help` lists. A renamed command or flag fails
//! here instead of in a reader's CI.

use std::path::Path;

use serde_yaml_ng::Value;

use crate::util;

/// The contents of every ```` ```yaml ```` block of the Markdown `text`.
fn yaml_blocks(text: &str) -> Vec<String> {
    let mut blocks = Vec::new();
    let mut current: Option<String> = None;
    for line in text.lines() {
        let fence = line.trim_start();
        if current.is_none() {
            if fence == "```yaml" {
                current = Some(String::new());
            }
        } else if fence == "```" {
            blocks.extend(current.take());
        } else if let Some(block) = current.as_mut() {
            block.push_str(line);
            block.push('\n');
        }
    }
    assert!(
        current.is_none(),
        "docs/ci.md: a ```yaml block is not closed"
    );
    blocks
}

/// Every step of every job of a parsed workflow.
fn steps(workflow: &Value) -> Vec<&Value> {
    let jobs = workflow["jobs"]
        .as_mapping()
        .expect("docs/ci.md: the workflow has no `jobs` mapping");
    jobs.iter()
        .flat_map(|(name, job)| {
            job["steps"]
                .as_sequence()
                .unwrap_or_else(|| panic!("docs/ci.md: job {name:?} has no `steps` list"))
        })
        .collect()
}

/// The `heldout` invocations in a shell script, one list of words each,
/// starting with the word after `heldout` (lines continued with `\` joined;
/// a command ends at `;`, `&&`, `||`, `|` or the end of its line).
fn heldout_commands(script: &str) -> Vec<Vec<String>> {
    let script = script.replace("\\\n", " ");
    let mut commands = Vec::new();
    for line in script.lines() {
        let mut words = line.split_whitespace();
        while let Some(word) = words.next() {
            if word != "heldout" {
                continue;
            }
            let mut command = Vec::new();
            for word in words.by_ref() {
                if matches!(word, ";" | "&&" | "||" | "|") {
                    break;
                }
                if let Some(last) = word.strip_suffix(';') {
                    command.push(last.to_string());
                    break;
                }
                command.push(word.to_string());
            }
            commands.push(command);
        }
    }
    commands
}

/// The subcommands listed under `Commands:` in `heldout --help` (each on a
/// line indented by two spaces; wrapped descriptions are indented further).
fn subcommands(help: &str) -> Vec<String> {
    help.lines()
        .skip_while(|line| line.trim_end() != "Commands:")
        .skip(1)
        .take_while(|line| !line.trim().is_empty())
        .filter(|line| line.starts_with("  ") && !line.starts_with("   "))
        .filter_map(|line| line.split_whitespace().next())
        .map(str::to_string)
        .collect()
}

/// Whether the help text `help` names the flag `flag` (`--out`), as a whole
/// word: `--out` is not found in `--output`.
fn names_flag(help: &str, flag: &str) -> bool {
    help.match_indices(flag).any(|(at, _)| {
        help[at + flag.len()..]
            .chars()
            .next()
            .is_none_or(|c| !(c.is_alphanumeric() || c == '-'))
    })
}

fn help_of(args: &[&str]) -> String {
    let output = util::run_in(&util::crate_root(), args);
    util::assert_success(&output);
    util::stdout_of(&output)
}

fn workflows() -> Vec<Value> {
    let path = util::crate_root().join("docs/ci.md");
    let text = std::fs::read_to_string(&path)
        .unwrap_or_else(|e| panic!("cannot read {}: {e}", path.display()));
    let blocks = yaml_blocks(&text);
    assert!(!blocks.is_empty(), "docs/ci.md has no ```yaml block");
    blocks
        .iter()
        .enumerate()
        .map(|(i, block)| {
            serde_yaml_ng::from_str(block)
                .unwrap_or_else(|e| panic!("docs/ci.md: yaml block {} does not parse: {e}", i + 1))
        })
        .collect()
}

#[test]
fn every_heldout_command_in_the_ci_recipe_exists_with_its_flags() {
    let top_help = help_of(&["--help"]);
    let known = subcommands(&top_help);
    assert!(
        known.iter().any(|c| c == "verify") && known.iter().any(|c| c == "run"),
        "could not read the subcommands of `heldout --help`: {known:?}\n{top_help}"
    );

    let mut used = Vec::new();
    for workflow in workflows() {
        for step in steps(&workflow) {
            let Some(script) = step["run"].as_str() else {
                continue;
            };
            for words in heldout_commands(script) {
                let line = format!("heldout {}", words.join(" "));
                let (help, flags) = match words.first() {
                    Some(first) if !first.starts_with('-') => {
                        assert!(
                            known.contains(first),
                            "docs/ci.md runs `{line}`, but `{first}` is not a subcommand \
                             of heldout (`heldout --help` lists {known:?})"
                        );
                        used.push(first.clone());
                        (help_of(&[first, "--help"]), &words[1..])
                    }
                    _ => (top_help.clone(), &words[..]),
                };
                for flag in flags.iter().filter(|w| w.starts_with('-')) {
                    let flag = flag.split('=').next().unwrap_or(flag);
                    assert!(
                        names_flag(&help, flag),
                        "docs/ci.md runs `{line}`, but its help does not list {flag}:\n{help}"
                    );
                }
            }
        }
    }
    assert!(
        used.iter().any(|c| c == "verify"),
        "the CI recipe never runs `heldout verify` (it runs {used:?})"
    );
}

#[test]
fn the_ci_recipe_keeps_the_fit_cache_and_uploads_the_reports() {
    let workflows = workflows();
    let all_steps: Vec<&Value> = workflows.iter().flat_map(steps).collect();
    let uses =
        |step: &Value, action: &str| step["uses"].as_str().is_some_and(|u| u.starts_with(action));
    let with = |step: &Value, key: &str| step["with"][key].as_str().unwrap_or("").to_string();

    // The fit cache: restored and saved under a key over the specs and data.
    for action in ["actions/cache/restore@", "actions/cache/save@"] {
        assert!(
            all_steps
                .iter()
                .any(|s| uses(s, action) && with(s, "path") == ".heldout/cache"),
            "docs/ci.md: no {action} step for .heldout/cache"
        );
    }
    let restore = all_steps
        .iter()
        .find(|s| uses(s, "actions/cache/restore@") && with(s, "path") == ".heldout/cache")
        .expect("checked above");
    let key = with(restore, "key");
    assert!(
        key.contains("hashFiles(") && key.contains("specs/**"),
        "docs/ci.md: the fit cache key does not digest the specs: {key}"
    );

    // The reports: written where the upload step looks for them.
    let upload = all_steps
        .iter()
        .find(|s| uses(s, "actions/upload-artifact@"))
        .expect("docs/ci.md: no actions/upload-artifact step");
    let uploaded = with(upload, "path");
    let out_dirs: Vec<String> = all_steps
        .iter()
        .filter_map(|s| s["run"].as_str())
        .flat_map(heldout_commands)
        .filter(|words| words.first().is_some_and(|w| w == "run"))
        .filter_map(|words| {
            let at = words.iter().position(|w| w == "--out")?;
            words.get(at + 1).cloned()
        })
        .collect();
    assert!(
        !out_dirs.is_empty(),
        "docs/ci.md: no `heldout run … --out DIR` writes the reports"
    );
    for dir in &out_dirs {
        assert_eq!(
            Path::new(dir),
            Path::new(uploaded.trim_end_matches('/')),
            "docs/ci.md: reports go to {dir} but the upload step takes {uploaded}"
        );
    }
}

/// The helpers above, on inputs whose answers are known.
#[test]
fn ci_doc_helpers_read_what_they_are_given() {
    let md = "text\n```yaml\na: 1\n```\n```sh\nb\n```\n  ```yaml\nc: 2\n  ```\n";
    assert_eq!(yaml_blocks(md), vec!["a: 1\n", "c: 2\n"]);

    let script = "heldout --version\nx && heldout verify specs/*.toml \\\n  --quiet; ls\n\
                  ~/.cargo/bin/heldout run a";
    assert_eq!(
        heldout_commands(script),
        vec![
            vec!["--version".to_string()],
            vec![
                "verify".to_string(),
                "specs/*.toml".to_string(),
                "--quiet".to_string()
            ],
        ]
    );

    let help = "Usage: x\n\nCommands:\n  run      Fit\n           more text\n  verify   Check\n\nOptions:\n  -h\n";
    assert_eq!(subcommands(help), vec!["run", "verify"]);

    assert!(names_flag("  --out <DIR>", "--out"));
    assert!(!names_flag("  --output <FILE>", "--out"));
    assert!(names_flag("--quiet", "--quiet"));
}
