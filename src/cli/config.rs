//! `flowsift config`: a commented example run file, or the run file's JSON Schema.

use std::path::PathBuf;

use anyhow::anyhow;
use clap::Args;

use flowsift::settings::{RunConfig, EXAMPLE_CONFIG};

/// Write an example run file or the schema.
#[derive(Debug, Args)]
#[command(group(clap::ArgGroup::new("what").required(true)))]
pub struct ConfigArgs {
    /// Print (or write with -o) a commented example run file.
    #[arg(long, group = "what")]
    pub example: bool,
    /// Print (or write with -o) the JSON Schema of run files.
    #[arg(long, group = "what")]
    pub schema: bool,
    /// Check a run file and print it back as parsed.
    #[arg(long, group = "what", value_name = "RUN.toml")]
    pub check: Option<PathBuf>,
    /// Write to this file instead of standard output (an existing file needs --force).
    #[arg(short, long)]
    pub output: Option<PathBuf>,
    /// Replace an existing file.
    #[arg(long)]
    pub force: bool,
}

pub fn run(a: ConfigArgs) -> anyhow::Result<()> {
    let text = if a.example {
        EXAMPLE_CONFIG.to_string()
    } else if a.schema {
        RunConfig::json_schema()
    } else if let Some(p) = &a.check {
        let text = std::fs::read_to_string(p).map_err(|e| anyhow!("{}: {e}", p.display()))?;
        let cfg = RunConfig::from_toml(&text, &p.display().to_string()).map_err(|e| anyhow!(e))?;
        cfg.cosmology
            .resolve()
            .map_err(|e| anyhow!("{}: cosmology: {e}", p.display()))?;
        cfg.frame
            .resolve()
            .map_err(|e| anyhow!("{}: frame: {e}", p.display()))?;
        format!(
            "{} is valid\n{}",
            p.display(),
            toml::to_string_pretty(&cfg)?
        )
    } else {
        unreachable!("clap requires one")
    };
    match a.output {
        Some(path) => {
            if path.exists() && !a.force {
                return Err(anyhow!(
                    "{}: file exists; pass --force to replace it",
                    path.display()
                ));
            }
            let dir = path
                .parent()
                .filter(|p| !p.as_os_str().is_empty())
                .unwrap_or(std::path::Path::new("."));
            let tmp = tempfile::NamedTempFile::new_in(dir)?;
            std::fs::write(tmp.path(), text)?;
            tmp.persist(&path)
                .map_err(|e| anyhow!("{}: {}", path.display(), e.error))?;
        }
        None => print!("{text}"),
    }
    Ok(())
}
