//! `--seed`, `--duration` and `--set`, shared by the commands that run a scenario.

use std::path::Path;

use clap::Args;
use halfwire::scenario::Overrides;
use halfwire::spec::Spec;

use super::Failure;

#[derive(Debug, Args)]
pub struct ScenarioOverrides {
    /// Override the scenario's seed.
    #[arg(long, value_name = "N")]
    pub seed: Option<u64>,
    /// Override the scenario's duration (simulated time with a unit, e.g. "50 ms").
    #[arg(long, value_name = "TIME")]
    pub duration: Option<String>,
    /// Set any key of the scenario, as if written in the file (repeatable):
    /// `--set 'transceiver.release_after_stop="-0.5 bit"'`
    #[arg(long = "set", value_name = "KEY=VALUE", value_parser = halfwire::scenario::parse_assignment)]
    pub set: Vec<(String, halfwire::scenario::edit::Literal)>,
    /// Simulate every polling cycle, token rotation and TDMA cycle event by
    /// event, with no cycles done in closed form (same results, slower; for
    /// checking). HALFWIRE_NO_SHORTCUTS=1 in the environment does the same.
    #[arg(long)]
    pub no_shortcuts: bool,
}

impl ScenarioOverrides {
    /// The overrides, for the library (which validates them with the scenario).
    pub fn get(&self) -> Overrides {
        let env = std::env::var_os("HALFWIRE_NO_SHORTCUTS").is_some_and(|v| !v.is_empty() && v != "0");
        Overrides {
            seed: self.seed,
            duration: self.duration.clone(),
            set: self.set.clone(),
            no_shortcuts: self.no_shortcuts || env,
        }
    }

    /// Read a scenario file and validate it with these overrides written into it.
    pub fn load(&self, path: &Path) -> Result<Spec, Failure> {
        let text = halfwire::scenario::read_text(path)?;
        Ok(halfwire::scenario::parse_with(&text, &halfwire::scenario::source_name(path), &self.get())?)
    }
}
