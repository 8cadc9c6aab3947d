//! `curlew synth`. STUB (skeleton): its owner fills it.

use curlew::Result;

#[derive(clap::Args, Debug)]
pub struct Args {}

pub fn run(args: Args) -> Result<()> {
    let _ = args;
    Err(curlew::Error::usage("'curlew synth' is not built yet"))
}
