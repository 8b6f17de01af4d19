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
    // A reader that stops early (`kcohort tables | head`) closes the pipe: stop quietly, as
    // the program would on SIGPIPE, instead of panicking inside `println!`.
    let default_hook = std::panic::take_hook();
    std::panic::set_hook(Box::new(move |info| {
        let message = info
            .payload()
            .downcast_ref::<String>()
            .map(String::as_str)
            .or_else(|| info.payload().downcast_ref::<&str>().copied())
            .unwrap_or("");
        if message.contains("failed printing to stdout") && message.contains("Broken pipe") {
            std::process::exit(0);
        }
        default_hook(info);
    }));
    let cli = command::Cli::parse();
    match command::run(cli) {
        Ok(()) => {}
        // The same early reader, seen as a write error (the CSV and JSON writers).
        Err(error) if error.chain().any(|c| c.to_string().contains("Broken pipe")) => {}
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
