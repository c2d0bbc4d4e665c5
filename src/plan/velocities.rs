//! The plan of a `velocities` run (and of `groups` and `malmquist`, which are `velocities`
//! with that stage on): settings settled against the input's record, every count checked,
//! every file the run reads and writes named and checked before any work.

use std::path::{Path, PathBuf};

use crate::catalogue::{sidecar_path, Format};
use crate::flow::outliers::OutlierSettings;
use crate::settings::RunConfig;

use super::common::Shared;
use super::paths::Files;
use super::run_file::merge_run_file;

/// The largest number of Monte Carlo draws per object a run accepts.
pub const MAX_MONTE_CARLO_DRAWS: usize = 1_000_000;

/// What the user asked for.
#[derive(Debug, Clone)]
pub struct VelocityOrder {
    pub input: PathBuf,
    pub output: PathBuf,
    /// Run file (TOML), merged under the flags.
    pub run_file: Option<PathBuf>,
    /// The flags as a run configuration.
    pub flags: RunConfig,
    pub force: bool,
    /// Use settings that contradict the input's record.
    pub override_input_settings: bool,
    /// The command line as typed, for the record.
    pub command_line: String,
    /// The subcommand: `velocities`, `groups` or `malmquist`.
    pub step: String,
    /// The memory the run may use, bytes (None: [`default_memory_limit`]).
    pub memory_limit: Option<u64>,
}

/// A checked `velocities` run.
#[derive(Debug, Clone)]
pub struct VelocityPlan {
    pub input: PathBuf,
    pub output: PathBuf,
    pub output_format: Format,
    pub force: bool,
    pub command_line: String,
    pub step: String,
    pub run_file: Option<PathBuf>,
    pub shared: Shared,
    /// Monte Carlo draws per object (0: none) and their seed.
    pub draws: usize,
    pub seed: u64,
    pub outliers: Option<OutlierSettings>,
    pub profile: Option<PathBuf>,
    pub groups_output: Option<PathBuf>,
    pub bulk_flow_output: Option<PathBuf>,
    pub export_output: Option<PathBuf>,
    /// The input is a partitioned survey (a folder of Parquet files) and the output a dataset
    /// in the same layout (see `catalogue::partitioned`).
    pub partitioned: bool,
    /// The memory the run may use, bytes: a catalogue that would take more is read,
    /// computed and written in blocks (`run::streamed`). It changes no value written.
    pub memory_limit: u64,
    /// The index, in the whole catalogue, of the input's first row (0 for a file; a piece of
    /// a catalogue in memory gives its own), so that Monte Carlo draws seeded per row are
    /// the same whichever piece a row comes in.
    pub first_row: u64,
}

/// The share of the machine's memory a run may use unless told otherwise.
pub const DEFAULT_MEMORY_SHARE: f64 = 0.25;

/// What a run assumes the machine has when its memory cannot be read (8 GiB).
const ASSUMED_MACHINE_MEMORY: u64 = 8 << 30;

/// A quarter of the machine's memory (`MemTotal` of /proc/meminfo; 8 GiB assumed where it
/// cannot be read).
pub fn default_memory_limit() -> u64 {
    let total = std::fs::read_to_string("/proc/meminfo")
        .ok()
        .and_then(|text| {
            text.lines()
                .find(|l| l.starts_with("MemTotal:"))
                .and_then(|l| l.split_whitespace().nth(1))
                .and_then(|kib| kib.parse::<u64>().ok())
        })
        .map(|kib| kib * 1024)
        .unwrap_or(ASSUMED_MACHINE_MEMORY);
    (total as f64 * DEFAULT_MEMORY_SHARE) as u64
}

/// A memory size as typed: a number of bytes with an optional suffix K, M, G or T (powers of
/// 1024; "B" and "iB" accepted after it), e.g. `1.5G`, `800M`, `2GiB`.
pub fn parse_memory_size(text: &str) -> Result<u64, String> {
    let t = text.trim();
    let upper = t.to_ascii_uppercase();
    let body = upper
        .strip_suffix("IB")
        .or_else(|| upper.strip_suffix('B'))
        .unwrap_or(&upper);
    let (number, factor) = match body.chars().last() {
        Some('K') => (&body[..body.len() - 1], 1u64 << 10),
        Some('M') => (&body[..body.len() - 1], 1 << 20),
        Some('G') => (&body[..body.len() - 1], 1 << 30),
        Some('T') => (&body[..body.len() - 1], 1 << 40),
        _ => (body, 1),
    };
    match number.trim().parse::<f64>() {
        Ok(x) if x.is_finite() && x > 0.0 && x * (factor as f64) < 1.8e19 => {
            Ok((x * factor as f64) as u64)
        }
        _ => Err(format!(
            "'{text}' is not a memory size: give bytes with an optional K, M, G or T (e.g. 1.5G)"
        )),
    }
}

impl VelocityPlan {
    /// The run's settings (record, run file and flags settled).
    pub fn config(&self) -> &RunConfig {
        &self.shared.config
    }

    /// The files read, by role, the catalogue first.
    pub fn inputs(&self) -> Vec<(&'static str, &Path)> {
        let mut v: Vec<(&'static str, &Path)> = vec![("catalogue", self.input.as_path())];
        if let Some(p) = &self.run_file {
            v.push(("run file", p.as_path()));
        }
        if let Some(p) = &self.profile {
            v.push(("Malmquist profile", p.as_path()));
        }
        v
    }
}

/// `<stem>.<tag>.<ext>` next to `output` (the extension kept whole, e.g. `.fits.gz`).
pub fn sibling_path(output: &Path, tag: &str) -> PathBuf {
    let name = output
        .file_name()
        .map(|n| n.to_string_lossy().to_string())
        .unwrap_or_default();
    let lower = name.to_ascii_lowercase();
    let ext_len = crate::catalogue::EXTENSIONS
        .iter()
        .find(|e| lower.ends_with(*e))
        .map(|e| e.len())
        .unwrap_or(0);
    let (stem, ext) = name.split_at(name.len() - ext_len);
    output.with_file_name(format!("{stem}.{tag}{ext}"))
}

/// `<output>.<tag>.json`.
pub fn sibling_json(output: &Path, tag: &str) -> PathBuf {
    let mut s = output.as_os_str().to_owned();
    s.push(format!(".{tag}.json"));
    PathBuf::from(s)
}

/// A table output and, for CSV/TSV, its sidecar.
pub(crate) fn table_output(files: &mut Files, role: &str, path: &Path) {
    files.write(role, path);
    if matches!(Format::from_path(path), Ok(Format::Csv | Format::Tsv)) {
        files.write(&format!("{role}'s provenance sidecar"), &sidecar_path(path));
    }
}

/// The output's format, from its name.
pub(crate) fn format_of_output(path: &Path) -> Result<Format, super::PlanError> {
    Format::from_path(path).map_err(|_| {
        super::PlanError::Settings(format!(
            "{}: unknown output type: {}",
            path.display(),
            crate::catalogue::FORMATS_HINT
        ))
    })
}

/// The checks of a run's settings that need no data: Monte Carlo draws, stage settings,
/// the Malmquist profile. Returns the draws, the outlier settings and the profile path.
/// `config --check` runs these too, so a run file it calls valid is one a run accepts.
pub fn check_settings(
    cfg: &RunConfig,
) -> Result<(usize, Option<OutlierSettings>, Option<PathBuf>), super::PlanError> {
    let draws = cfg.errors.monte_carlo.unwrap_or(0);
    if draws == 1 {
        return Err("monte_carlo needs at least 2 draws per object to give percentiles".into());
    }
    if draws > MAX_MONTE_CARLO_DRAWS {
        return Err(format!(
            "monte_carlo = {draws} draws per object is more than the {MAX_MONTE_CARLO_DRAWS} flowsift accepts"
        ).into());
    }
    let outliers = cfg
        .outliers
        .as_ref()
        .map(OutlierSettings::from_choice)
        .transpose()
        .map_err(|e| super::PlanError::Settings(e.to_string()))?;
    if let Some(b) = &cfg.bulk_flow {
        if let Some(s) = b.sigma_star {
            if !(s.is_finite() && s >= 0.0) {
                return Err(format!("bulk flow: sigma_star must be non-negative, got {s}").into());
            }
        }
    }
    let profile = cfg
        .malmquist
        .as_ref()
        .and_then(|m| m.profile.as_ref())
        .map(PathBuf::from);
    if let Some(m) = &cfg.malmquist {
        if m.method == Some(crate::settings::MalmquistMethod::Profile) && m.profile.is_none() {
            return Err(
                "Malmquist method 'profile' needs a profile table (profile = \"file\")".into(),
            );
        }
    }
    Ok((draws, outliers, profile))
}

/// Check the order and resolve it into a plan.
pub fn plan_velocities(order: VelocityOrder) -> Result<VelocityPlan, super::PlanError> {
    let user = merge_run_file(order.run_file.as_deref(), &order.flags)?;
    let partitioned = crate::catalogue::partitioned::is_partitioned(&order.input);
    let output_format = if partitioned {
        check_dataset_output(&order.input, &order.output)?;
        Format::Parquet
    } else {
        format_of_output(&order.output)?
    };
    // Beside a dataset folder the stage tables are single Parquet files.
    let beside = |tag: &str| {
        if partitioned {
            sibling_path(&order.output, &format!("{tag}.parquet"))
        } else {
            sibling_path(&order.output, tag)
        }
    };
    let shared = Shared::resolve(
        Some(&order.input),
        user.input.hdu.as_deref(),
        &user,
        order.override_input_settings,
    )?;
    let cfg = &shared.config;
    let (draws, outliers, profile) = check_settings(cfg)?;
    let groups_output = cfg.groups.as_ref().map(|g| match &g.output {
        Some(p) => PathBuf::from(p),
        None => beside("groups"),
    });
    let bulk_flow_output = cfg
        .bulk_flow
        .as_ref()
        .map(|_| sibling_json(&order.output, "bulkflow"));
    let export_output = cfg.export.as_ref().map(|e| match &e.output {
        Some(p) => PathBuf::from(p),
        None => beside("flow"),
    });

    let mut files = Files::new();
    if partitioned {
        files.read_folder("catalogue", &order.input);
    } else {
        files.read("catalogue", &order.input);
    }
    if let Some(p) = &order.run_file {
        files.read("run file", p);
    }
    if let Some(p) = &user.frame.apex_file {
        files.read("apex file", std::path::Path::new(p));
    }
    if let Some(p) = &profile {
        files.read("Malmquist profile", p);
    }
    if partitioned {
        files.write_folder("output dataset", &order.output);
    } else {
        table_output(&mut files, "output", &order.output);
    }
    if let Some(p) = &groups_output {
        format_of_output(p)?;
        table_output(&mut files, "group table", p);
    }
    if let Some(p) = &bulk_flow_output {
        files.write("bulk-flow JSON", p);
    }
    if let Some(p) = &export_output {
        format_of_output(p)?;
        table_output(&mut files, "export", p);
    }
    files.check(order.force)?;

    Ok(VelocityPlan {
        input: order.input,
        output: order.output,
        output_format,
        force: order.force,
        command_line: order.command_line,
        step: order.step,
        run_file: order.run_file,
        draws,
        seed: cfg.errors.seed.unwrap_or(1),
        outliers,
        profile,
        groups_output,
        bulk_flow_output,
        export_output,
        partitioned,
        memory_limit: order.memory_limit.unwrap_or_else(default_memory_limit),
        first_row: 0,
        shared,
    })
}

/// A partitioned survey's output is a folder of its own: not a file name with a table
/// extension, and neither inside the input folder nor holding it.
fn check_dataset_output(input: &Path, output: &Path) -> Result<(), super::PlanError> {
    if Format::from_path(output).is_ok() {
        return Err(format!(
            "{}: the input {} is a partitioned survey (a folder of Parquet files); give a folder as the output, written in the same layout",
            output.display(),
            input.display()
        )
        .into());
    }
    let (i, o) = (
        super::paths::absolute(input),
        super::paths::absolute(output),
    );
    if o.starts_with(&i) || i.starts_with(&o) {
        return Err(format!(
            "{}: the output folder must lie outside the input folder {} (and not contain it)",
            output.display(),
            input.display()
        )
        .into());
    }
    Ok(())
}
