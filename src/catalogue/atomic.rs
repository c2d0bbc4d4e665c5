//! The one way flowsift writes a file — tables, JSON, figures, reports, run files: into a
//! temporary file in the destination's folder, then renamed over the destination, so that no
//! reader ever sees a partial file. Temporary files are named `.flowsift-partial-…-NAME`, so a
//! file left by a killed process says what it was. Nothing is forced to disk (no fsync): a
//! machine crash right after a run can lose the new output, which the run (seeded,
//! reproducible) can write again.

use std::fs::File;
use std::path::{Path, PathBuf};
use std::sync::Mutex;

use super::CatalogueError;

/// Prefix of every temporary file flowsift creates next to an output.
pub const PARTIAL_PREFIX: &str = ".flowsift-partial-";

/// Temporary files being written now, so that an interrupted run can remove them
/// ([`remove_unfinished`]).
static UNFINISHED: Mutex<Vec<PathBuf>> = Mutex::new(Vec::new());

fn unfinished() -> std::sync::MutexGuard<'static, Vec<PathBuf>> {
    UNFINISHED.lock().unwrap_or_else(|e| e.into_inner())
}

/// A temporary file listed in [`UNFINISHED`] while it lives.
struct Listed(PathBuf);

impl Listed {
    fn new(path: &Path) -> Listed {
        unfinished().push(path.to_path_buf());
        Listed(path.to_path_buf())
    }
}

impl Drop for Listed {
    fn drop(&mut self) {
        let mut list = unfinished();
        if let Some(i) = list.iter().position(|p| *p == self.0) {
            list.swap_remove(i);
        }
    }
}

/// Remove every temporary file this process is writing (for a signal handler: the process
/// is about to exit, and no destructor will run). Outputs already moved into place stay.
pub fn remove_unfinished() {
    for path in unfinished().iter() {
        std::fs::remove_file(path).ok();
    }
}

/// Temporary files left in `folder` by a run that was killed before it could remove them
/// (for a caution: they can be deleted).
pub fn leftovers_in(folder: &Path) -> Vec<PathBuf> {
    let Ok(entries) = std::fs::read_dir(folder) else {
        return vec![];
    };
    let live = unfinished().clone();
    let mut found: Vec<PathBuf> = entries
        .flatten()
        .filter(|e| e.file_name().to_string_lossy().starts_with(PARTIAL_PREFIX))
        .map(|e| e.path())
        .filter(|p| !live.contains(p))
        .collect();
    found.sort();
    found
}

/// The caution for the leftovers in the folder of `output`, if any.
pub fn leftovers_note(output: &Path) -> Option<String> {
    let found = leftovers_in(folder_of(output));
    (!found.is_empty()).then(|| {
        format!(
            "{} unfinished file(s) left in {} by an earlier flowsift run that was killed \
             while writing (safe to delete): {}.",
            found.len(),
            folder_of(output).display(),
            found
                .iter()
                .map(|p| p.display().to_string())
                .collect::<Vec<_>>()
                .join(", ")
        )
    })
}

/// The folder a file is in ("." for a bare name).
pub fn folder_of(path: &Path) -> &Path {
    path.parent()
        .filter(|p| !p.as_os_str().is_empty())
        .unwrap_or(Path::new("."))
}

fn temporary(path: &Path) -> Result<tempfile::NamedTempFile, CatalogueError> {
    let dir = folder_of(path);
    if !dir.is_dir() {
        return Err(CatalogueError::write(
            path,
            format!("folder {} does not exist", dir.display()),
        ));
    }
    // Keep the whole name (and so the extension) so that writers that look at it behave
    // (cfitsio's .gz, the image encoder's .png).
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().to_string())
        .unwrap_or_default();
    tempfile::Builder::new()
        .prefix(PARTIAL_PREFIX)
        .suffix(&format!("-{name}"))
        .tempfile_in(dir)
        .map_err(|e| CatalogueError::write(path, format!("cannot create a temporary file: {e}")))
}

/// Temporary files are created private (0600); a finished file gets the usual permissions of
/// a new file (0666 less the process umask, here taken as 022: 0644).
fn set_readable(path: &Path) {
    #[cfg(unix)]
    {
        use std::os::unix::fs::PermissionsExt;
        std::fs::set_permissions(path, std::fs::Permissions::from_mode(0o644)).ok();
    }
    #[cfg(not(unix))]
    let _ = path;
}

/// Messages from a writer that name the temporary file name the destination instead.
fn name_destination(message: String, tmp: &Path, path: &Path) -> String {
    message.replace(&tmp.display().to_string(), &path.display().to_string())
}

fn not_moved(path: &Path, e: std::io::Error) -> CatalogueError {
    CatalogueError::write(
        path,
        format!("cannot move the finished file into place: {e}"),
    )
}

/// Write `path` through an open temporary file.
pub fn write_via_file(
    path: &Path,
    fill: impl FnOnce(&File) -> Result<(), String>,
) -> Result<(), CatalogueError> {
    let tmp = temporary(path)?;
    let _listed = Listed::new(tmp.path());
    fill(tmp.as_file())
        .map_err(|e| CatalogueError::write(path, name_destination(e, tmp.path(), path)))?;
    set_readable(tmp.path());
    tmp.persist(path).map_err(|e| not_moved(path, e.error))?;
    Ok(())
}

/// An output being written over time (a catalogue written block by block): an open
/// temporary file beside `path`, moved into place by [`PendingFile::commit`]; dropped
/// uncommitted (an error on the way), it is removed and the destination left as it was.
pub struct PendingFile {
    tmp: tempfile::NamedTempFile,
    _listed: Listed,
    path: PathBuf,
}

impl PendingFile {
    pub fn create(path: &Path) -> Result<PendingFile, CatalogueError> {
        let tmp = temporary(path)?;
        let listed = Listed::new(tmp.path());
        Ok(PendingFile {
            tmp,
            _listed: listed,
            path: path.to_path_buf(),
        })
    }

    pub fn file(&self) -> &File {
        self.tmp.as_file()
    }

    /// A writer's message, naming the destination rather than the temporary file.
    pub fn error(&self, message: String) -> CatalogueError {
        CatalogueError::write(
            &self.path,
            name_destination(message, self.tmp.path(), &self.path),
        )
    }

    pub fn commit(self) -> Result<(), CatalogueError> {
        set_readable(self.tmp.path());
        let path = self.path;
        self.tmp
            .persist(&path)
            .map_err(|e| not_moved(&path, e.error))?;
        Ok(())
    }
}

/// Write `path` by a writer that creates its file by name (cfitsio, the PNG encoder): `fill`
/// gets a fresh temporary path that does not exist yet, with the destination's extension.
pub fn write_via_path(
    path: &Path,
    fill: impl FnOnce(&Path) -> Result<(), String>,
) -> Result<(), CatalogueError> {
    let tmp = temporary(path)?.into_temp_path();
    let tmp_path: PathBuf = tmp.to_path_buf();
    let _listed = Listed::new(&tmp_path);
    // The writer creates the file itself; the guard removes whatever is left on failure.
    std::fs::remove_file(&tmp_path).ok();
    fill(&tmp_path)
        .map_err(|e| CatalogueError::write(path, name_destination(e, &tmp_path, path)))?;
    set_readable(&tmp_path);
    tmp.persist(path).map_err(|e| not_moved(path, e.error))?;
    Ok(())
}

/// Write `bytes` to `path`.
pub fn write_bytes(path: &Path, bytes: &[u8]) -> Result<(), CatalogueError> {
    write_via_file(path, |mut f| {
        use std::io::Write;
        f.write_all(bytes).map_err(|e| format!("cannot write: {e}"))
    })
}
