//! Every file a command reads and writes, checked once before any work: each input exists;
//! no output is any input (catalogue, field, density, profile, run file) or another output
//! of the same run — by path, through a symbolic link or as a hard link; an existing output
//! needs `--force`.

use std::path::{Path, PathBuf};

/// The files of one run, each with its role (`catalogue`, `output`, `bulk-flow JSON` …).
#[derive(Debug, Clone, Default)]
pub struct Files {
    pub reads: Vec<(String, PathBuf)>,
    pub writes: Vec<(String, PathBuf)>,
    /// Paths that may be folders (datasets).
    pub folders: Vec<PathBuf>,
}

/// What identifies a file: its device and inode when it exists (so links are seen through),
/// else its absolute path with the folder's links resolved.
#[derive(Debug, Clone, PartialEq, Eq)]
enum Identity {
    Inode(u64, u64),
    Path(PathBuf),
}

fn identity(path: &Path) -> Identity {
    #[cfg(unix)]
    {
        use std::os::unix::fs::MetadataExt;
        if let Ok(m) = std::fs::metadata(path) {
            return Identity::Inode(m.dev(), m.ino());
        }
    }
    Identity::Path(absolute(path))
}

/// The absolute path of `path`, through links where it exists (its folder's otherwise).
pub(crate) fn absolute(path: &Path) -> PathBuf {
    if let Ok(p) = std::fs::canonicalize(path) {
        return p;
    }
    let dir = crate::catalogue::atomic::folder_of(path);
    let dir = std::fs::canonicalize(dir).unwrap_or_else(|_| dir.to_path_buf());
    match path.file_name() {
        Some(n) => dir.join(n),
        None => dir,
    }
}

impl Files {
    pub fn new() -> Files {
        Files::default()
    }

    /// A file the command reads.
    pub fn read(&mut self, role: &str, path: &Path) -> &mut Files {
        self.reads.push((role.to_string(), path.to_path_buf()));
        self
    }

    /// A file the command writes.
    pub fn write(&mut self, role: &str, path: &Path) -> &mut Files {
        self.writes.push((role.to_string(), path.to_path_buf()));
        self
    }

    /// A folder the command reads as one dataset (a partitioned survey).
    pub fn read_folder(&mut self, role: &str, path: &Path) -> &mut Files {
        self.folders.push(path.to_path_buf());
        self.read(role, path)
    }

    /// A folder the command writes as one dataset.
    pub fn write_folder(&mut self, role: &str, path: &Path) -> &mut Files {
        self.folders.push(path.to_path_buf());
        self.write(role, path)
    }

    /// Check them all; every problem is reported at once.
    pub fn check(&self, force: bool) -> Result<(), super::PlanError> {
        let mut problems = vec![];
        for (role, p) in &self.reads {
            if !p.exists() {
                problems.push(format!("{}: no such file (the {role})", p.display()));
            } else if p.is_dir() && !self.folders.contains(p) {
                problems.push(format!(
                    "{}: is a folder, not a file (the {role})",
                    p.display()
                ));
            }
        }
        let reads: Vec<(&str, &Path, Identity)> = self
            .reads
            .iter()
            .map(|(r, p)| (r.as_str(), p.as_path(), identity(p)))
            .collect();
        let mut seen: Vec<(&str, &Path, Identity, Identity)> = vec![];
        for (role, p) in &self.writes {
            let id = identity(p);
            let by_path = Identity::Path(absolute(p));
            if let Some((r, q, _)) = reads
                .iter()
                .find(|(_, q, rid)| *rid == id || Identity::Path(absolute(q)) == by_path)
            {
                let how = if absolute(q) == absolute(p) {
                    String::new()
                } else {
                    format!(", the same file as {}", q.display())
                };
                problems.push(format!(
                    "{}: refusing to overwrite the input file (the {r}{how}) with the {role}; choose another output",
                    p.display()
                ));
                continue;
            }
            if let Some((r, q, _, _)) = seen
                .iter()
                .find(|(_, _, sid, spath)| *sid == id || *spath == by_path)
            {
                problems.push(format!(
                    "{}: the {role} and the {r} ({}) are the same file; give them different names",
                    p.display(),
                    q.display()
                ));
                continue;
            }
            if p.is_dir() && !self.folders.contains(p) {
                problems.push(format!("{}: is a folder (the {role})", p.display()));
            } else if p.exists() && !force {
                problems.push(format!(
                    "{}: the {role} exists; pass --force to replace it",
                    p.display()
                ));
            }
            seen.push((role.as_str(), p.as_path(), id, by_path));
        }
        if problems.is_empty() {
            Ok(())
        } else {
            Err(super::PlanError::Files { problems })
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn outputs_never_meet_inputs_or_each_other() {
        let dir = tempfile::tempdir().unwrap();
        let input = dir.path().join("in.csv");
        std::fs::write(&input, "a\n1\n").unwrap();
        let out = dir.path().join("out.csv");
        // Plain: fine.
        let mut f = Files::new();
        f.read("catalogue", &input).write("output", &out);
        f.check(false).unwrap();
        // The output is the input, by another spelling of its path.
        let mut f = Files::new();
        f.read("catalogue", &input)
            .write("output", &dir.path().join(".").join("in.csv"));
        let e = f.check(true).unwrap_err().to_string();
        assert!(
            e.contains("refusing to overwrite the input file (the catalogue"),
            "{e}"
        );
        // Through a hard link and a symbolic link.
        let hard = dir.path().join("hard.csv");
        std::fs::hard_link(&input, &hard).unwrap();
        let mut f = Files::new();
        f.read("catalogue", &input).write("output", &hard);
        assert!(f
            .check(true)
            .unwrap_err()
            .to_string()
            .contains("the same file as"));
        #[cfg(unix)]
        {
            let soft = dir.path().join("soft.csv");
            std::os::unix::fs::symlink(&input, &soft).unwrap();
            let mut f = Files::new();
            f.read("catalogue", &input).write("output", &soft);
            assert!(f.check(true).is_err());
        }
        // Two outputs of one run.
        let mut f = Files::new();
        f.read("catalogue", &input)
            .write("output", &out)
            .write("export", &out);
        assert!(f.check(true).unwrap_err().to_string().contains("same file"));
        // An existing output needs force; a missing input is named.
        std::fs::write(&out, "x").unwrap();
        let mut f = Files::new();
        f.read("catalogue", &dir.path().join("nope.csv"))
            .write("output", &out);
        let e = f.check(false).unwrap_err().to_string();
        assert!(e.contains("no such file") && e.contains("--force"), "{e}");
    }
}
