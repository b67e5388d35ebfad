//! `porewise completions SHELL` and `porewise manual` through the real binary: each script
//! names the commands and options (new ones too), bash accepts its script, and the man page
//! holds every subcommand with its options.

mod common;

use common::{porewise, stdout};

#[test]
fn completion_scripts_name_the_commands_and_options() {
    for (shell, marker) in [
        ("bash", "_porewise()"),
        ("zsh", "#compdef porewise"),
        ("fish", "complete -c porewise"),
        ("powershell", "Register-ArgumentCompleter"),
    ] {
        let out = porewise().args(["completions", shell]).assert().success();
        let text = stdout(&out);
        assert!(text.contains(marker), "{shell}: no {marker:?}");
        // Fish writes long options as `-l sheet`, the others as `--sheet`.
        for word in ["import", "review", "sheet", "accept-episode", "skip-lines"] {
            assert!(text.contains(word), "{shell}: no {word:?}");
        }
    }
    let refused = porewise().args(["completions", "tcsh"]).assert().code(2);
    assert!(String::from_utf8_lossy(&refused.get_output().stderr).contains("bash"));
}

#[test]
fn bash_accepts_its_script() {
    let bash = std::path::Path::new("/bin/bash");
    if !bash.exists() {
        eprintln!("no /bin/bash here: syntax check skipped");
        return;
    }
    let out = porewise().args(["completions", "bash"]).assert().success();
    let dir = tempfile::tempdir().expect("temp dir");
    let script = dir.path().join("porewise.bash");
    std::fs::write(&script, stdout(&out)).expect("write");
    let status = std::process::Command::new(bash)
        .arg("-n")
        .arg(&script)
        .status()
        .expect("bash runs");
    assert!(status.success());
}

#[test]
fn the_manual_holds_every_subcommand() {
    let out = porewise().arg("manual").assert().success();
    let page = stdout(&out);
    assert!(page.contains(".TH porewise 1"));
    for section in [
        "POREWISE INIT",
        "POREWISE IMPORT LAB",
        "POREWISE IMPORT LOGGER",
        "POREWISE REVIEW",
        "POREWISE COMPLETIONS",
    ] {
        assert!(page.contains(&format!(".SH \"{section}\"")), "no {section}");
    }
    for option in ["\\-\\-skip\\-lines", "\\-\\-by\\-record", "\\-\\-sheet"] {
        assert!(page.contains(option), "no {option}");
    }
}
