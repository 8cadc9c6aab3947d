//! `curlew run` (lead).

use curlew::Result;

#[derive(clap::Args, Debug)]
pub struct Args {}

pub fn run(args: Args) -> Result<()> {
    let _ = args;
    Err(curlew::Error::usage("'curlew run' is not built yet"))
}
