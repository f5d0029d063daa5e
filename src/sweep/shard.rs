//! Which share of a sweep's runs this process takes: `--shard I/N`, or the
//! index a batch engine puts in the environment.

/// Run `n` (point-major) belongs to shard `n mod count`.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Shard {
    /// 0-based.
    pub index: u64,
    pub count: u64,
}

impl Shard {
    pub const WHOLE: Shard = Shard { index: 0, count: 1 };

    pub fn takes(&self, run: u64) -> bool {
        run % self.count == self.index
    }

    /// Parse `I/N` with 0 ≤ I < N.
    pub fn parse(text: &str) -> Result<Shard, String> {
        let (i, n) = text.split_once('/').ok_or_else(|| format!("--shard {text:?}: write it as I/N, e.g. 0/4"))?;
        let i: u64 =
            i.trim().parse().map_err(|_| format!("--shard {text:?}: the index {i:?} is not a whole number"))?;
        let n: u64 =
            n.trim().parse().map_err(|_| format!("--shard {text:?}: the count {n:?} is not a whole number"))?;
        Shard::new(i, n).map_err(|e| format!("--shard {text:?}: {e}"))
    }

    fn new(index: u64, count: u64) -> Result<Shard, String> {
        if count == 0 {
            return Err("the shard count must be at least 1".into());
        }
        if index >= count {
            return Err(format!("the index {index} is out of range: shards are numbered 0 to {}", count - 1));
        }
        Ok(Shard { index, count })
    }
}

/// Where the shard came from, for the message that says so.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct FromEnv {
    pub shard: Shard,
    pub source: String,
}

/// The shard a batch engine assigned, read through `var` (the environment):
/// a Slurm job array (`SLURM_ARRAY_TASK_ID` with `SLURM_ARRAY_TASK_COUNT`, or
/// with `SLURM_ARRAY_TASK_MIN`/`MAX` and an optional `STEP`), or a Kubernetes
/// Indexed Job (`JOB_COMPLETION_INDEX`, with `count` from the command line).
/// `None` when neither is present.
pub fn from_env(var: impl Fn(&str) -> Option<String>, count: Option<u64>) -> Result<Option<FromEnv>, String> {
    let num = |name: &str| -> Result<Option<u64>, String> {
        match var(name) {
            None => Ok(None),
            Some(v) => v.trim().parse().map(Some).map_err(|_| format!("{name}={v:?} is not a whole number")),
        }
    };
    if let Some(id) = num("SLURM_ARRAY_TASK_ID")? {
        let min = num("SLURM_ARRAY_TASK_MIN")?;
        let max = num("SLURM_ARRAY_TASK_MAX")?;
        let step = num("SLURM_ARRAY_TASK_STEP")?.unwrap_or(1).max(1);
        let count_var = num("SLURM_ARRAY_TASK_COUNT")?;
        if let (Some(min), Some(max), Some(n)) = (min, max, count_var) {
            if max >= min && (max - min) / step + 1 != n {
                return Err(format!(
                    "the Slurm array has gaps (SLURM_ARRAY_TASK_COUNT={n}, but {min}..={max} step {step} holds {}): \
                     submit a contiguous array such as --array=0-{}, or give --shard I/N",
                    (max - min) / step + 1,
                    n.saturating_sub(1)
                ));
            }
        }
        let (index, total, how) = match (min, max, count_var) {
            (Some(min), Some(max), _) if id >= min && max >= min => (
                (id - min) / step,
                (max - min) / step + 1,
                format!("SLURM_ARRAY_TASK_ID={id} in {min}..={max} step {step}"),
            ),
            (min, _, Some(n)) => {
                let min = min.unwrap_or(0);
                let how = format!("SLURM_ARRAY_TASK_ID={id}, SLURM_ARRAY_TASK_COUNT={n}, first {min}");
                (id.checked_sub(min).ok_or("SLURM_ARRAY_TASK_ID is below SLURM_ARRAY_TASK_MIN")? / step, n, how)
            }
            _ => {
                return Err(
                    "SLURM_ARRAY_TASK_ID is set without SLURM_ARRAY_TASK_COUNT or SLURM_ARRAY_TASK_MIN/MAX".into()
                )
            }
        };
        let total = count.unwrap_or(total);
        let shard = Shard::new(index, total).map_err(|e| format!("Slurm array: {e}"))?;
        return Ok(Some(FromEnv { shard, source: format!("Slurm job array ({how})") }));
    }
    if let Some(index) = num("JOB_COMPLETION_INDEX")? {
        let total = count.ok_or(
            "JOB_COMPLETION_INDEX is set (a Kubernetes Indexed Job): give the job's completions with --shard-count N",
        )?;
        let shard = Shard::new(index, total).map_err(|e| format!("Kubernetes Indexed Job: {e}"))?;
        return Ok(Some(FromEnv { shard, source: format!("Kubernetes Indexed Job (JOB_COMPLETION_INDEX={index})") }));
    }
    Ok(None)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn env<'a>(pairs: &'a [(&'a str, &'a str)]) -> impl Fn(&str) -> Option<String> + 'a {
        move |k| pairs.iter().find(|(n, _)| *n == k).map(|(_, v)| v.to_string())
    }

    #[test]
    fn parses_and_checks_shards() {
        assert_eq!(Shard::parse("2/3").unwrap(), Shard { index: 2, count: 3 });
        assert!(Shard::parse("3/3").unwrap_err().contains("out of range"));
        assert!(Shard::parse("0/0").unwrap_err().contains("at least 1"));
        assert!(Shard::parse("1-3").unwrap_err().contains("I/N"));
        let s = Shard { index: 1, count: 3 };
        assert_eq!((0..9).filter(|&n| s.takes(n)).collect::<Vec<_>>(), [1, 4, 7]);
    }

    #[test]
    fn reads_slurm_and_kubernetes_indices() {
        // Slurm sets these for `sbatch --array=1-4` (from the sbatch manual's OUTPUT ENVIRONMENT VARIABLES).
        let e = env(&[("SLURM_ARRAY_TASK_ID", "3"), ("SLURM_ARRAY_TASK_MIN", "1"), ("SLURM_ARRAY_TASK_MAX", "4")]);
        let s = from_env(e, None).unwrap().unwrap();
        assert_eq!(s.shard, Shard { index: 2, count: 4 });
        assert!(s.source.contains("Slurm"));
        let e = env(&[("SLURM_ARRAY_TASK_ID", "0"), ("SLURM_ARRAY_TASK_COUNT", "3")]);
        assert_eq!(from_env(e, None).unwrap().unwrap().shard, Shard { index: 0, count: 3 });
        let e = env(&[("JOB_COMPLETION_INDEX", "4")]);
        assert!(from_env(&e, None).unwrap_err().contains("--shard-count"));
        assert_eq!(from_env(&e, Some(5)).unwrap().unwrap().shard, Shard { index: 4, count: 5 });
        assert!(from_env(&e, Some(4)).unwrap_err().contains("out of range"));
        assert_eq!(from_env(env(&[]), None).unwrap(), None);
        // `--array=1,3,4`: three tasks spread over 1..=4.
        let gaps = env(&[
            ("SLURM_ARRAY_TASK_ID", "3"),
            ("SLURM_ARRAY_TASK_MIN", "1"),
            ("SLURM_ARRAY_TASK_MAX", "4"),
            ("SLURM_ARRAY_TASK_COUNT", "3"),
        ]);
        assert!(from_env(gaps, None).unwrap_err().contains("has gaps"));
    }
}
