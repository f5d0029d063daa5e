//! `--seed` and `--duration`, shared by the commands that run a scenario.

use clap::Args;
use halfwire::spec::Spec;
use halfwire::units::{self, Picos};

use super::Failure;

#[derive(Debug, Args)]
pub struct ScenarioOverrides {
    /// Override the scenario's seed.
    #[arg(long)]
    pub seed: Option<u64>,
    /// Override the scenario's duration (simulated time with a unit, e.g. "50 ms").
    #[arg(long)]
    pub duration: Option<String>,
}

impl ScenarioOverrides {
    /// `--duration`, parsed.
    pub fn duration(&self) -> Result<Option<Picos>, Failure> {
        self.duration
            .as_deref()
            .map(|d| units::parse_time(d).map_err(|e| Failure::input(format!("--duration: {e}"))))
            .transpose()
    }

    /// Apply both to a validated scenario.
    pub fn apply(&self, spec: &mut Spec) -> Result<(), Failure> {
        if let Some(seed) = self.seed {
            spec.seed = seed;
        }
        if let Some(d) = self.duration()? {
            if d <= spec.warmup {
                return Err(Failure::input(format!(
                    "--duration {d} must be longer than the scenario's warmup ({})",
                    spec.warmup
                )));
            }
            spec.duration = d;
        }
        Ok(())
    }
}
