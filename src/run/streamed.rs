//! A `velocities` run on a catalogue larger than the memory it may use: read, computed and
//! written a block of rows at a time, from a Parquet or FITS reader to a Parquet writer
//! ([`crate::catalogue::blocks`]), so that memory follows the block, not the catalogue.
//!
//! Two passes over the input. The first reads only the columns the run uses, for what
//! needs the whole column: the largest redshift (how far the distance table must reach)
//! and the cz guard (the median of the redshift column). The second computes each block
//! exactly as a run on the whole catalogue computes those rows: the same distance table,
//! Monte Carlo draws seeded by the row's place in the catalogue, the same notes; the sample
//! check is gathered block by block ([`SampleTally`]). The values written are those of a
//! run in memory, row for row; only the Parquet row groups follow the blocks.
//!
//! A partitioned survey goes the same way, partition after partition, each written to its
//! own file of the output dataset ([`StagedDataset`]); a row's place in the whole survey
//! seeds its draws, as in memory.
//!
//! Runs with a stage that needs the whole sample at once (groups, outliers, bulk flow,
//! export, Malmquist's summary) and other input or output formats are run in memory
//! ([`super::run_velocities`] decides).

use std::path::PathBuf;

use serde::Serialize;

use super::{
    cosmology_reaching, derive_rows, inputs_of, object_context, sample_stages, tally_rows,
    top_redshift, velocity_record, Phase, RunError, RunSummary, EARLIER_RUN_NOTE,
};
use crate::catalogue::atomic::PendingFile;
use crate::catalogue::blocks::{writes_in_blocks, BlockSource};
use crate::catalogue::parquet::{ParquetBlockWriter, ParquetBlocks, ROW_GROUP_ROWS};
use crate::catalogue::partitioned::{partition_files, same_columns, survey_note, StagedDataset};
use crate::catalogue::record::RowCounts;
use crate::catalogue::{check_destination, storable, Format, ReadOptions, WriteOptions};
use crate::flow::sanity::SampleTally;
use crate::pipeline::inputs::{check_redshift_column, redshift_column_values, UnitGuard};
use crate::pipeline::{self, RowStatus};
use crate::plan::columns::resolve_columns;
use crate::plan::VelocityPlan;

/// Memory a run takes per row and input column held (the block as read, the output
/// table's copy of it), in bytes: two 8-byte values.
pub const BYTES_PER_INPUT_COLUMN_ROW: u64 = 16;
/// Memory a run takes per row for what it derives (about forty 8-byte columns, the
/// extracted inputs, the output table and the writer's encoded pages), in bytes: a
/// deliberate upper bound; the peak resident memory of a run on 6 × 10⁵ rows of the demo
/// scenario was about 480 bytes per row in one piece (DEVELOPERS.md gives the command).
pub const BYTES_PER_ROW_DERIVED: u64 = 1000;
/// What the sample check keeps per row over the whole catalogue (v_pec and η, for their
/// medians), in bytes.
pub const TALLY_BYTES_PER_ROW: u64 = 16;
/// The most rows in a block: larger blocks are not faster (each block is already split
/// over every thread), only larger.
pub const MAX_BLOCK_ROWS: usize = 2 * ROW_GROUP_ROWS;

/// How a run read its catalogue in blocks (for the summary).
#[derive(Debug, Clone, Copy, Serialize)]
pub struct BlockReport {
    pub blocks: usize,
    pub rows_per_block: usize,
    /// The memory limit the block size was chosen for, bytes.
    pub memory_limit: u64,
}

/// The memory a run in memory would take for `rows` rows of `columns` input columns.
pub fn memory_for(rows: usize, columns: usize) -> u64 {
    rows as u64 * (BYTES_PER_INPUT_COLUMN_ROW * columns as u64 + BYTES_PER_ROW_DERIVED)
}

/// The rows per block for a memory limit: a whole number of Parquet row groups (at least
/// one, at most [`MAX_BLOCK_ROWS`]) after the sample check's share of the limit.
pub fn block_rows_for(limit: u64, rows: usize, columns: usize) -> usize {
    let budget = limit.saturating_sub(rows as u64 * TALLY_BYTES_PER_ROW);
    let per_row = memory_for(1, columns);
    let fit = (budget / per_row) as usize / ROW_GROUP_ROWS * ROW_GROUP_ROWS;
    fit.clamp(ROW_GROUP_ROWS, MAX_BLOCK_ROWS)
}

/// One file read in blocks: the catalogue, or one partition of a survey.
struct Piece {
    source: BlockSource,
    /// The partition's path relative to the survey folder (None: a single catalogue).
    relative: Option<PathBuf>,
}

/// A run that will go in blocks: the catalogue opened (one piece, or a survey's partitions
/// in their order), the rows per block.
pub struct Streaming {
    pieces: Vec<Piece>,
    block_rows: usize,
}

/// Whether `plan` runs in blocks: only when the catalogue would not fit in its memory
/// limit in one piece, and the run, the input and the output allow it.
pub fn choose(plan: &VelocityPlan) -> Result<Option<Streaming>, RunError> {
    let cfg = plan.config();
    let whole_sample = cfg.groups.is_some()
        || plan.outliers.is_some()
        || cfg.bulk_flow.is_some()
        || cfg.export.is_some()
        || cfg.malmquist.is_some();
    if whole_sample || !writes_in_blocks(plan.output_format) {
        return Ok(None);
    }
    let pieces = if plan.partitioned {
        let mut pieces = vec![];
        for relative in partition_files(&plan.input).map_err(|e| e.to_string())? {
            let source =
                ParquetBlocks::open(&plan.input.join(&relative)).map_err(|e| e.to_string())?;
            pieces.push(Piece {
                source: BlockSource::Parquet(source),
                relative: Some(relative),
            });
        }
        pieces
    } else {
        let options = ReadOptions {
            hdu: cfg.input.hdu.clone(),
        };
        match BlockSource::open(&plan.input, &options).map_err(|e| e.to_string())? {
            Some(source) => vec![Piece {
                source,
                relative: None,
            }],
            None => return Ok(None),
        }
    };
    let rows: usize = pieces.iter().map(|p| p.source.rows()).sum();
    let columns = pieces[0].source.columns();
    if memory_for(rows, columns) <= plan.memory_limit {
        return Ok(None);
    }
    let block_rows = block_rows_for(plan.memory_limit, rows, columns);
    Ok(Some(Streaming { pieces, block_rows }))
}

/// One block: which piece, where in it, where in the whole catalogue.
#[derive(Clone, Copy)]
struct Block {
    piece: usize,
    start: usize,
    global: usize,
}

fn blocks_of(pieces: &[Piece], block_rows: usize) -> Vec<Block> {
    let mut blocks = vec![];
    let mut global = 0;
    for (piece, p) in pieces.iter().enumerate() {
        let rows = p.source.rows();
        for start in (0..rows).step_by(block_rows) {
            blocks.push(Block {
                piece,
                start,
                global: global + start,
            });
        }
        global += rows;
    }
    blocks
}

/// Run `plan` in blocks (see the [module documentation](self)).
pub fn run(
    plan: &VelocityPlan,
    streaming: Streaming,
    read_notes: Vec<String>,
    progress: &(dyn Fn(Phase, usize) + Sync),
) -> Result<RunSummary, RunError> {
    let cfg = plan.config();
    let shared = &plan.shared;
    let where_ = |e: RunError| RunError::in_file(&plan.input, e);
    let read_error = |e: crate::catalogue::CatalogueError| RunError::Failed(e.to_string());
    let Streaming { pieces, block_rows } = streaming;
    let rows: usize = pieces.iter().map(|p| p.source.rows()).sum();
    let blocks = blocks_of(&pieces, block_rows);
    let read = |b: &Block, columns: Option<&[String]>| {
        pieces[b.piece]
            .source
            .read(b.start, block_rows, columns)
            .map_err(read_error)
    };

    // What reading the catalogue has to say, as a run in memory says it: the first
    // partition's notes, the others' under their file's name, the survey's size.
    let (first, replaced) = sample_stages::strip_earlier_run(read(&blocks[0], None)?);
    let mut catalogue_notes = first.notes.clone();
    if plan.partitioned {
        catalogue_notes.clear();
        let mut schema = None;
        for (k, piece) in pieces.iter().enumerate() {
            let head = piece.source.read(0, 1, None).map_err(read_error)?;
            let head = sample_stages::strip_earlier_run(head).0;
            let path = piece
                .relative
                .as_ref()
                .map_or(plan.input.clone(), |r| plan.input.join(r));
            match &schema {
                None => schema = Some(head.frame.schema().clone()),
                Some(first) => {
                    same_columns(first, head.frame.schema(), &path).map_err(read_error)?
                }
            }
            if k == 0 {
                catalogue_notes.extend(head.notes.iter().cloned());
            } else {
                catalogue_notes.extend(
                    head.notes
                        .iter()
                        .map(|n| format!("{}: {n}", path.display())),
                );
            }
        }
        catalogue_notes.push(survey_note(&plan.input, pieces.len(), rows));
    }
    let column_order: Vec<String> = first
        .frame
        .get_column_names()
        .iter()
        .map(|n| n.to_string())
        .collect();
    let columns = resolve_columns(&first, &cfg.columns, cfg.conventions.length_unit)
        .map_err(|e| where_(e.into()))?;

    // First pass: the columns the run reads, for the largest redshift and the cz guard.
    let used: Vec<String> = [
        Some(&columns.ra),
        Some(&columns.dec),
        Some(&columns.z),
        columns.z_err.as_ref(),
        Some(&columns.distance),
        columns.distance_err.as_ref(),
    ]
    .into_iter()
    .flatten()
    .map(|r| r.column.clone())
    .collect();
    let mut z_column = Vec::with_capacity(rows);
    let mut z_top = 0.0_f64;
    for b in &blocks {
        let block = read(b, Some(&used))?;
        z_column.extend(redshift_column_values(&block, &columns).map_err(|e| where_(e.into()))?);
        let (input, _, _) =
            inputs_of(&block, &columns, shared, UnitGuard::Checked).map_err(where_)?;
        z_top = z_top.max(top_redshift(&input));
    }
    check_redshift_column(&z_column, &columns).map_err(|e| where_(e.into()))?;
    drop(z_column);
    let cosmology = cosmology_reaching(shared.cosmology.params, z_top).map_err(where_)?;
    let ctx = object_context(shared, &cosmology, columns.length_unit);

    // Second pass: each block computed and written, to the file of its piece.
    let options = WriteOptions {
        force: plan.force,
        protected: plan.inputs().iter().map(|(_, p)| p.to_path_buf()).collect(),
    };
    let staged = if plan.partitioned {
        Some(StagedDataset::create(&plan.output, &options).map_err(|e| e.to_string())?)
    } else {
        check_destination(&plan.output, &options).map_err(|e| e.to_string())?;
        None
    };
    let mut pending = Vec::with_capacity(pieces.len());
    for piece in &pieces {
        let path = match (&staged, &piece.relative) {
            (Some(staged), Some(relative)) => {
                staged.path_for(relative).map_err(|e| e.to_string())?
            }
            _ => plan.output.clone(),
        };
        pending.push(PendingFile::create(&path).map_err(|e| e.to_string())?);
    }
    // Every file stays open until the end: each one's footer carries the whole run's record.
    let mut writers: Vec<Option<ParquetBlockWriter<'_>>> = pieces.iter().map(|_| None).collect();
    let mut first = Some(first);
    let mut notes = vec![];
    let mut renamed = vec![];
    let mut left_out = None;
    let mut no_rows: Option<crate::catalogue::Table> = None;
    let mut counts = std::collections::BTreeMap::<RowStatus, usize>::new();
    let mut tally = SampleTally::default();
    for b in &blocks {
        let mut table = match first.take() {
            Some(t) => t,
            None => sample_stages::strip_earlier_run(read(b, None)?).0,
        };
        if plan.partitioned && b.piece > 0 {
            table.frame = table
                .frame
                .select(column_order.iter().map(|c| c.as_str()))
                .map_err(|e| RunError::Failed(e.to_string()))?;
        }
        let (mut input, given_z_helio, frame_notes) =
            inputs_of(&table, &columns, shared, UnitGuard::Checked).map_err(where_)?;
        let derived_rows = derive_rows(
            plan,
            &ctx,
            &columns,
            &mut input,
            given_z_helio,
            plan.first_row + b.global as u64,
            progress,
        )?;
        drop(input);
        table.notes.clear();
        let derived_rows_notes = derived_rows.notes;
        for (status, n) in derived_rows.derived.counts() {
            *counts.entry(status).or_insert(0) += n;
        }
        tally_rows(&mut tally, &derived_rows.derived);
        let (out, block_renamed) = pipeline::assemble(
            &table,
            derived_rows.derived,
            derived_rows.extra,
            columns.length_unit.label(),
        )?;
        drop(table);
        if b.global == 0 {
            notes = shared.cautions();
            notes.extend(catalogue_notes.iter().cloned());
            notes.extend(frame_notes);
            notes.extend(read_notes.iter().cloned());
            if !replaced.is_empty() {
                notes.push(EARLIER_RUN_NOTE.into());
            }
            notes.extend(derived_rows_notes);
            left_out = crate::catalogue::left_out_note(&plan.output, &out);
            renamed = block_renamed;
        }
        let out = match storable::prepare(Format::Parquet, &out).map_err(RunError::Failed)? {
            Some(prepared) => prepared,
            None => out,
        };
        if no_rows.is_none() {
            let mut empty = out.clone();
            empty.frame = out.frame.clear();
            no_rows = Some(empty);
        }
        let file = &pending[b.piece];
        if writers[b.piece].is_none() {
            writers[b.piece] = Some(
                ParquetBlockWriter::new(file.file(), &out)
                    .map_err(|e| file.error(e).to_string())?,
            );
        }
        if let Some(w) = writers[b.piece].as_mut() {
            w.write(&out).map_err(|e| file.error(e).to_string())?;
        }
    }

    let sample_check = tally.finish();
    if let Some(c) = &sample_check {
        notes.extend(
            c.warnings
                .iter()
                .map(|w| format!("Implausible result: {w}")),
        );
    }
    notes.extend(left_out);
    let rows_ok = *counts.get(&RowStatus::Ok).unwrap_or(&0);
    let record = velocity_record(
        plan,
        &columns,
        RowCounts {
            read: rows,
            ok: rows_ok,
        },
        &notes,
    );
    let provenance = record.to_provenance();
    for (writer, file) in writers.into_iter().zip(&pending) {
        let writer = match (writer, &no_rows) {
            (Some(w), _) => w,
            // A partition without rows: a file of the run's columns, no rows, the record.
            (None, Some(empty)) => ParquetBlockWriter::new(file.file(), empty)
                .map_err(|e| file.error(e).to_string())?,
            (None, None) => return Err(RunError::Failed("no rows were written".into())),
        };
        writer
            .finish(&provenance)
            .map_err(|e| file.error(e).to_string())?;
    }
    for file in pending {
        file.commit().map_err(|e| e.to_string())?;
    }
    if let Some(staged) = staged {
        staged.commit().map_err(|e| e.to_string())?;
    }

    Ok(RunSummary {
        input: plan.input.clone(),
        output: plan.output.clone(),
        rows_read: rows,
        rows_ok,
        counts: RowStatus::ALL
            .iter()
            .map(|s| (s.name().to_string(), *counts.get(s).unwrap_or(&0)))
            .collect(),
        mapping: columns.describe(),
        renamed,
        cautions: notes,
        monte_carlo_draws: plan.draws,
        sidecar: None,
        replaced,
        groups: None,
        outliers: None,
        bulk_flow: None,
        export: None,
        sample_check,
        blocks: Some(BlockReport {
            blocks: blocks.len(),
            rows_per_block: block_rows,
            memory_limit: plan.memory_limit,
        }),
    })
}
