//! `completions` and `manual`: shell completion scripts and a man page, generated from the
//! same clap definitions that parse the arguments, so they never fall out of step.

use anyhow::Result;
use clap::{Args, CommandFactory};
use std::io::Write;

#[derive(Args, Debug)]
pub struct CompletionsArgs {
    /// The shell to complete for
    shell: clap_complete::Shell,
}

/// Print the completion script for a shell.
pub fn completions(a: CompletionsArgs) -> Result<i32> {
    let mut cmd = super::Cli::command();
    let mut w = super::out::data_stdout();
    clap_complete::generate(a.shell, &mut cmd, "emend", &mut w);
    w.flush()?;
    Ok(0)
}

/// Print the man page (roff), for `man -l -` or a file in a man folder.
pub fn manual() -> Result<i32> {
    let cmd = super::Cli::command();
    let mut w = super::out::data_stdout();
    clap_mangen::Man::new(cmd).render(&mut w)?;
    // One section per command, so `man emend` documents every option.
    for sub in super::Cli::command().get_subcommands() {
        if sub.is_hide_set() {
            continue;
        }
        writeln!(w, ".SH \"EMEND {}\"", sub.get_name().to_uppercase())?;
        if let Some(about) = sub.get_about() {
            writeln!(w, "{about}")?;
        }
        clap_mangen::Man::new(sub.clone()).render_options_section(&mut w)?;
    }
    w.flush()?;
    Ok(0)
}
