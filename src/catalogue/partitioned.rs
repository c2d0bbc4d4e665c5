//! A partitioned survey: a directory of Parquet files (in any folder layout beneath it, such
//! as Hive-style `key=value/` folders) read as one catalogue, and written back as one dataset
//! with the same layout, one output file per input file.
//!
//! The partitions are read in the byte order of their paths relative to the directory, and
//! their rows are concatenated in that order, so a row's index in the whole catalogue (which
//! seeds its Monte Carlo stream) does not depend on how the survey is split into files.
//! Every partition must have the same columns with the same types; folder keys are not added
//! as columns (the output keeps them in its folder names). Files whose name starts with `.`
//! or `_` (markers such as `_SUCCESS`, `.crc` files) are not partitions.

use std::path::{Path, PathBuf};

use polars::prelude::Schema;

use super::{
    read_table, write_table, CatalogueError, FoundProvenance, Provenance, ReadOptions, Table,
    WriteOptions,
};

/// One partition: its path relative to the dataset directory and its number of rows.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Partition {
    pub relative: PathBuf,
    pub rows: usize,
}

/// Whether `path` names a partitioned survey (an existing directory).
pub fn is_partitioned(path: &Path) -> bool {
    path.is_dir()
}

/// The Parquet files under `dir`, relative to it, in byte order of their paths.
pub fn partition_files(dir: &Path) -> Result<Vec<PathBuf>, CatalogueError> {
    let mut found = vec![];
    let mut pending = vec![dir.to_path_buf()];
    while let Some(d) = pending.pop() {
        let entries = std::fs::read_dir(&d)
            .map_err(|e| CatalogueError::read(&d, format!("cannot list the folder: {e}")))?;
        for entry in entries {
            let entry = entry
                .map_err(|e| CatalogueError::read(&d, format!("cannot list the folder: {e}")))?;
            let path = entry.path();
            let name = entry.file_name().to_string_lossy().to_string();
            if name.starts_with('.') || name.starts_with('_') {
                continue;
            }
            if path.is_dir() {
                pending.push(path);
            } else if name.to_ascii_lowercase().ends_with(".parquet")
                || name.to_ascii_lowercase().ends_with(".pq")
            {
                let rel = path.strip_prefix(dir).unwrap_or(&path).to_path_buf();
                found.push(rel);
            }
        }
    }
    found.sort_by(|a, b| a.as_os_str().cmp(b.as_os_str()));
    if found.is_empty() {
        return Err(CatalogueError::read(
            dir,
            "a folder is read as a partitioned survey, but it holds no .parquet files",
        ));
    }
    Ok(found)
}

/// Read every partition and concatenate them, in the order of [`partition_files`]. The
/// column metadata (units, UCDs) and notes are the first partition's; a partition whose
/// columns or types differ from the first's is an error naming it and the column.
pub fn read_partitioned(
    dir: &Path,
    options: &ReadOptions,
) -> Result<(Table, Vec<Partition>), CatalogueError> {
    let files = partition_files(dir)?;
    let mut parts = Vec::with_capacity(files.len());
    let mut whole: Option<Table> = None;
    for rel in files {
        let path = dir.join(&rel);
        let t = read_table(&path, options)?;
        parts.push(Partition {
            relative: rel,
            rows: t.frame.height(),
        });
        match &mut whole {
            None => whole = Some(t),
            Some(w) => {
                same_columns(w.frame.schema(), t.frame.schema(), &path)?;
                let first = w.frame.schema();
                let aligned = t
                    .frame
                    .select(first.iter_names().cloned())
                    .map_err(|e| CatalogueError::read(&path, e.to_string()))?;
                w.frame
                    .vstack_mut(&aligned)
                    .map_err(|e| CatalogueError::read(&path, e.to_string()))?;
                w.notes
                    .extend(t.notes.iter().map(|n| format!("{}: {n}", path.display())));
            }
        }
    }
    let mut table = whole.ok_or_else(|| CatalogueError::read(dir, "no partitions"))?;
    table.frame.align_chunks_par();
    let note = survey_note(dir, parts.len(), table.frame.height());
    table.notes.push(note);
    Ok((table, parts))
}

/// Partitions after the first must have its columns with its types (in any order).
pub fn same_columns(first: &Schema, this: &Schema, path: &Path) -> Result<(), CatalogueError> {
    for (name, dtype) in first.iter() {
        match this.get(name) {
            None => {
                return Err(CatalogueError::read(
                    path,
                    format!(
                        "column '{name}' of the first partition is missing here; every partition needs the same columns"
                    ),
                ))
            }
            Some(d) if d != dtype => {
                return Err(CatalogueError::read(
                    path,
                    format!(
                        "column '{name}' is {d} here but {dtype} in the first partition; every partition needs the same column types"
                    ),
                ))
            }
            Some(_) => {}
        }
    }
    if let Some(extra) = this.iter_names().find(|n| first.get(n).is_none()) {
        return Err(CatalogueError::read(
            path,
            format!(
                "column '{extra}' is not in the first partition; every partition needs the same columns"
            ),
        ));
    }
    Ok(())
}

/// The note a run keeps of having read a partitioned survey.
pub fn survey_note(dir: &Path, files: usize, rows: usize) -> String {
    format!(
        "Read {} as a partitioned survey of {files} Parquet files ({rows} rows).",
        dir.display()
    )
}

/// The provenance of a partitioned survey: that of its first partition.
pub fn read_partitioned_provenance(dir: &Path) -> Result<FoundProvenance, CatalogueError> {
    let files = partition_files(dir)?;
    let first = dir.join(&files[0]);
    let mut found = super::read_provenance(&first, None)?;
    found.origin = format!("{} (first partition {})", found.origin, first.display());
    Ok(found)
}

/// Write `table` as a dataset under `out_dir`: the rows of each partition, in order, to the
/// same relative path, through a [`StagedDataset`].
pub fn write_partitioned(
    out_dir: &Path,
    table: &Table,
    parts: &[Partition],
    provenance: &Provenance,
    options: &WriteOptions,
) -> Result<(), CatalogueError> {
    let total: usize = parts.iter().map(|p| p.rows).sum();
    if total != table.frame.height() {
        return Err(CatalogueError::write(
            out_dir,
            format!(
                "the partitions hold {total} rows but the table {}: no output written",
                table.frame.height()
            ),
        ));
    }
    let staged = StagedDataset::create(out_dir, options)?;
    let mut offset = 0usize;
    for p in parts {
        let piece = Table {
            frame: table.frame.slice(offset as i64, p.rows),
            meta: table.meta.clone(),
            notes: vec![],
            keywords: table.keywords.clone(),
        };
        offset += p.rows;
        write_table(&staged.path_for(&p.relative)?, &piece, provenance, options)?;
    }
    staged.commit()
}

/// A dataset being written: its files go into a fresh hidden folder beside the destination,
/// which is moved into place only when every file is written, so a failed run leaves no half
/// dataset (the folder is removed when the value is dropped uncommitted). An existing
/// destination is replaced only with `options.force`.
pub struct StagedDataset {
    out_dir: PathBuf,
    staging: PathBuf,
    committed: bool,
}

impl StagedDataset {
    pub fn create(out_dir: &Path, options: &WriteOptions) -> Result<StagedDataset, CatalogueError> {
        if out_dir.exists() && !options.force {
            return Err(CatalogueError::write(
                out_dir,
                "the output exists; pass --force to replace it",
            ));
        }
        let staging = beside(out_dir, "partial");
        if staging.exists() {
            std::fs::remove_dir_all(&staging)
                .map_err(|e| CatalogueError::write(&staging, e.to_string()))?;
        }
        std::fs::create_dir_all(&staging)
            .map_err(|e| CatalogueError::write(&staging, e.to_string()))?;
        Ok(StagedDataset {
            out_dir: out_dir.to_path_buf(),
            staging,
            committed: false,
        })
    }

    /// Where the partition at `relative` is written (its folders made).
    pub fn path_for(&self, relative: &Path) -> Result<PathBuf, CatalogueError> {
        let path = self.staging.join(relative);
        if let Some(d) = path.parent() {
            std::fs::create_dir_all(d).map_err(|e| CatalogueError::write(d, e.to_string()))?;
        }
        Ok(path)
    }

    /// Move the written dataset into place (replacing an existing one).
    pub fn commit(mut self) -> Result<(), CatalogueError> {
        let out_dir = self.out_dir.clone();
        let moved = |e: std::io::Error| CatalogueError::write(&out_dir, e.to_string());
        if out_dir.exists() {
            let old = beside(&out_dir, "replaced");
            std::fs::rename(&out_dir, &old).map_err(moved)?;
            std::fs::rename(&self.staging, &out_dir).map_err(moved)?;
            let _ = std::fs::remove_dir_all(&old);
        } else {
            std::fs::rename(&self.staging, &out_dir).map_err(moved)?;
        }
        self.committed = true;
        Ok(())
    }
}

impl Drop for StagedDataset {
    fn drop(&mut self) {
        if !self.committed {
            let _ = std::fs::remove_dir_all(&self.staging);
        }
    }
}

/// A hidden folder beside `out_dir`, named for this process and `what`.
fn beside(out_dir: &Path, what: &str) -> PathBuf {
    let parent = match out_dir.parent() {
        Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
        _ => PathBuf::from("."),
    };
    let name = out_dir
        .file_name()
        .map(|n| n.to_string_lossy().to_string())
        .unwrap_or_else(|| "dataset".into());
    parent.join(format!(".{name}.{what}-{}", std::process::id()))
}

#[cfg(test)]
mod tests {
    use super::*;
    use polars::prelude::*;
    use std::collections::BTreeMap;

    fn table(rows: std::ops::Range<i64>) -> Table {
        let x: Vec<f64> = rows.clone().map(|i| i as f64).collect();
        let id: Vec<i64> = rows.collect();
        let frame = DataFrame::new(
            x.len(),
            vec![Column::new("x".into(), x), Column::new("id".into(), id)],
        )
        .unwrap();
        Table::new(frame, BTreeMap::new())
    }

    #[test]
    fn a_split_dataset_reads_as_its_rows_in_path_order_and_writes_back_in_its_layout() {
        let dir = tempfile::tempdir().unwrap();
        let src = dir.path().join("survey");
        for (rel, rows) in [
            ("field=b/part-0.parquet", 5..9),
            ("field=a/part-1.parquet", 2..5),
            ("field=a/part-0.parquet", 0..2),
        ] {
            let p = src.join(rel);
            std::fs::create_dir_all(p.parent().unwrap()).unwrap();
            write_table(
                &p,
                &table(rows),
                &Provenance::default(),
                &WriteOptions::default(),
            )
            .unwrap();
        }
        std::fs::write(src.join("_SUCCESS"), "").unwrap();
        let (t, parts) = read_partitioned(&src, &ReadOptions::default()).unwrap();
        let ids: Vec<i64> = t
            .frame
            .column("id")
            .unwrap()
            .i64()
            .unwrap()
            .into_no_null_iter()
            .collect();
        assert_eq!(ids, (0..9).collect::<Vec<_>>());
        assert_eq!(
            parts.iter().map(|p| p.rows).collect::<Vec<_>>(),
            vec![2, 3, 4]
        );

        let out = dir.path().join("out");
        write_partitioned(
            &out,
            &t,
            &parts,
            &Provenance::default(),
            &WriteOptions::default(),
        )
        .unwrap();
        let back =
            read_table(&out.join("field=b/part-0.parquet"), &ReadOptions::default()).unwrap();
        let ids: Vec<i64> = back
            .frame
            .column("id")
            .unwrap()
            .i64()
            .unwrap()
            .into_no_null_iter()
            .collect();
        assert_eq!(ids, vec![5, 6, 7, 8]);
        // An existing dataset is kept without force.
        let e = write_partitioned(
            &out,
            &t,
            &parts,
            &Provenance::default(),
            &WriteOptions::default(),
        )
        .unwrap_err();
        assert!(e.to_string().contains("--force"), "{e}");
    }

    #[test]
    fn partitions_that_disagree_are_named() {
        let dir = tempfile::tempdir().unwrap();
        let src = dir.path().join("survey");
        std::fs::create_dir_all(&src).unwrap();
        let w = |name: &str, t: &Table| {
            write_table(
                &src.join(name),
                t,
                &Provenance::default(),
                &WriteOptions::default(),
            )
            .unwrap()
        };
        w("a.parquet", &table(0..3));
        let mut other = table(3..5);
        other.frame.rename("x", "y".into()).unwrap();
        w("b.parquet", &other);
        let e = read_partitioned(&src, &ReadOptions::default())
            .unwrap_err()
            .to_string();
        assert!(e.contains("b.parquet") && e.contains("'x'"), "{e}");
        let empty = dir.path().join("empty");
        std::fs::create_dir_all(&empty).unwrap();
        let e = read_partitioned(&empty, &ReadOptions::default())
            .unwrap_err()
            .to_string();
        assert!(e.contains("no .parquet files"), "{e}");
    }
}
