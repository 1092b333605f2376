//! The binary's own code: the command line ([`args`]), the commands that only inspect
//! ([`commands`]) and what the terminal shows ([`console`]: progress bar and run summaries).

pub mod args;
pub mod commands;
pub mod console;
pub mod track_error;
