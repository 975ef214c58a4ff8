//! `kerf explore`: the planning terminal UI (placeholder until the UI lands).
use anyhow::Result;
use clap::Args;

use super::{InputArgs, PlanArgs};

#[derive(Args)]
pub struct ExploreArgs {
    #[command(flatten)]
    pub input: InputArgs,
    #[command(flatten)]
    pub plan: PlanArgs,
    /// Reference texts (TOML) for the similarity view.
    #[arg(long)]
    pub refs: Option<std::path::PathBuf>,
}

pub fn run(_a: ExploreArgs) -> Result<()> {
    anyhow::bail!("kerf explore is not built yet")
}
