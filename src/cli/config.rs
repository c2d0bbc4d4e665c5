//! `flowsift config`: a commented example run file, or the run file's JSON Schema.

use std::path::PathBuf;

use anyhow::anyhow;
use clap::Args;

use flowsift::catalogue::atomic::write_bytes;
use flowsift::plan::{check_run_file, Files};
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
    if let Some(out) = &a.output {
        let mut files = Files::new();
        if let Some(p) = &a.check {
            files.read("run file", p);
        }
        files.write("output", out);
        files.check(a.force).map_err(|e| anyhow!(e))?;
    }
    let text = if a.example {
        EXAMPLE_CONFIG.to_string()
    } else if a.schema {
        RunConfig::json_schema()
    } else if let Some(p) = &a.check {
        let cfg = check_run_file(p).map_err(|e| anyhow!(e))?;
        format!(
            "{} is valid\n{}",
            p.display(),
            toml::to_string_pretty(&cfg)?
        )
    } else {
        unreachable!("clap requires one")
    };
    match a.output {
        Some(path) => write_bytes(&path, text.as_bytes())?,
        None => print!("{text}"),
    }
    Ok(())
}
