//! `kcohort`: the one binary. Parses arguments, runs one command, prints its error chain once and
//! picks the exit code: 0 ok, 1 a problem the user can fix (the message says how), 2 a bug.

mod command;
mod failure;
mod progress_bar;
mod report_files;
mod store_query;
mod summary;
mod table_output;

use clap::Parser;

fn main() {
    let cli = command::Cli::parse();
    match command::run(cli) {
        Ok(()) => {}
        Err(error) => {
            let code = failure::exit_code(&error);
            eprintln!("error: {error}");
            for cause in error.chain().skip(1) {
                eprintln!("  caused by: {cause}");
            }
            if code == 2 {
                eprintln!("this is a bug in kcohort; please report it with the command you ran");
            }
            std::process::exit(code);
        }
    }
}
