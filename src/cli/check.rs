//! `icefold check CONFIG`: validate and print the resolved configuration.

use super::ConfigArgs;
use crate::error::Error;

/// Print the resolved config (every default filled in) to stdout.
pub fn main(args: &ConfigArgs) -> Result<(), Error> {
    let cfg = super::load(args)?;
    println!(
        "# {}: valid; resolved configuration (every default filled in):",
        args.config.display()
    );
    print!("{}", cfg.resolved_text());
    Ok(())
}
