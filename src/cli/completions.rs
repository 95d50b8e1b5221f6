//! `flue completions SHELL` and `flue manpage`: the command line described
//! for shells and for `man`, generated from the same definitions that parse it.

use clap::{Args, CommandFactory};
use clap_complete::Shell;

#[derive(Debug, Args)]
pub struct CompletionsArgs {
    /// The shell to complete for.
    #[arg(value_enum)]
    pub shell: Shell,
}

pub fn completions(args: &CompletionsArgs) -> super::Outcome {
    let mut cmd = super::Cli::command();
    // Generated into memory first: the generator panics on a failed write,
    // and a closed pipe (`flue completions bash | head`) must exit quietly.
    let mut script = Vec::new();
    clap_complete::generate(args.shell, &mut cmd, "flue", &mut script);
    super::emit(None, false, |w| w.write_all(&script))
}

pub fn manpage() -> super::Outcome {
    let cmd = super::Cli::command();
    super::emit(None, false, |w| clap_mangen::Man::new(cmd).render(w))
}
