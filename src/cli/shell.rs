//! `porewise completions SHELL` and `porewise manual`: shell completion scripts and a man
//! page generated from the command-line definitions, so they never fall behind the commands.

use std::io::Write;

use clap::{Args, CommandFactory, ValueEnum};

use crate::error::Outcome;

/// The shells completions are written for.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum Shell {
    /// Bash.
    Bash,
    /// Zsh.
    Zsh,
    /// Fish.
    Fish,
    /// PowerShell.
    Powershell,
}

/// Arguments of `porewise completions`.
#[derive(Debug, Args)]
#[command(after_help = "Examples:\n  \
    porewise completions bash > ~/.local/share/bash-completion/completions/porewise\n  \
    porewise completions zsh > ~/.zfunc/_porewise      (with fpath+=~/.zfunc before compinit)\n  \
    porewise completions fish > ~/.config/fish/completions/porewise.fish\n  \
    porewise completions powershell >> $PROFILE")]
pub struct CompletionsArgs {
    /// The shell: bash, zsh, fish or powershell.
    #[arg(value_enum)]
    pub shell: Shell,
}

/// Arguments of `porewise manual`.
#[derive(Debug, Args)]
#[command(after_help = "Example:\n  \
    porewise manual > ~/.local/share/man/man1/porewise.1 && man porewise")]
pub struct ManualArgs {}

/// Write the completion script for `shell` to `out`.
///
/// # Errors
/// Writing fails.
pub fn write_completions(shell: Shell, out: &mut dyn Write) -> std::io::Result<()> {
    use clap_complete::{generate, shells};
    let mut cmd = super::Cli::command();
    let name = cmd.get_name().to_string();
    match shell {
        Shell::Bash => generate(shells::Bash, &mut cmd, name, out),
        Shell::Zsh => generate(shells::Zsh, &mut cmd, name, out),
        Shell::Fish => generate(shells::Fish, &mut cmd, name, out),
        Shell::Powershell => generate(shells::PowerShell, &mut cmd, name, out),
    }
    out.flush()
}

/// Write the man page (roff, section 1) to `out`: the main page followed by one section per
/// subcommand, each with its options and examples.
///
/// # Errors
/// Writing fails.
pub fn write_manual(out: &mut dyn Write) -> std::io::Result<()> {
    let cmd = super::Cli::command();
    clap_mangen::Man::new(cmd.clone()).render(out)?;
    for sub in cmd.get_subcommands() {
        render_sub(&cmd, sub, out)?;
    }
    out.flush()
}

/// One subcommand (and its own subcommands) as a section of the page.
fn render_sub(
    parent: &clap::Command,
    sub: &clap::Command,
    out: &mut dyn Write,
) -> std::io::Result<()> {
    let parent_name = parent.get_display_name().unwrap_or(parent.get_name());
    let name = format!("{parent_name} {}", sub.get_name());
    let sub = sub
        .clone()
        .display_name(name.clone())
        .bin_name(name.clone());
    let man = clap_mangen::Man::new(sub.clone());
    writeln!(out, ".SH \"{}\"", name.to_uppercase())?;
    man.render_synopsis_section(out)?;
    man.render_description_section(out)?;
    man.render_options_section(out)?;
    if sub.get_after_help().is_some() {
        man.render_extra_section(out)?;
    }
    for inner in sub.get_subcommands() {
        render_sub(&sub, inner, out)?;
    }
    Ok(())
}

/// Run `porewise completions`.
///
/// # Errors
/// stdout cannot be written.
pub fn completions(args: &CompletionsArgs) -> anyhow::Result<Outcome> {
    write_completions(args.shell, &mut std::io::stdout().lock())?;
    Ok(Outcome::Success)
}

/// Run `porewise manual`.
///
/// # Errors
/// stdout cannot be written.
pub fn manual(_args: &ManualArgs) -> anyhow::Result<Outcome> {
    write_manual(&mut std::io::stdout().lock())?;
    Ok(Outcome::Success)
}
