//! `icefold sweep CONFIG`.

use super::{ConfigArgs, OutputArgs};
use crate::error::Error;

/// Not yet wired (in progress on the tipping-point branch).
pub fn main(_args: &ConfigArgs, _out: &OutputArgs) -> Result<(), Error> {
    Err(Error::Other("icefold sweep: in progress".into()))
}
