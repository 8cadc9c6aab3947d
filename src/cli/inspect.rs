//! `curlew inspect`. STUB (skeleton): its owner fills it.

use curlew::Result;

#[derive(clap::Args, Debug)]
pub struct Args {}

pub fn run(args: Args) -> Result<()> {
    let _ = args;
    Err(curlew::Error::usage("'curlew inspect' is not built yet"))
}
