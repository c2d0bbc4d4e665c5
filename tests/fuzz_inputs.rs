//! Seeded mutation fuzzing of the catalogue readers, end to end through the command line.
//!
//! A small valid catalogue is written as CSV, FITS and Parquet, then mutated: byte flips,
//! truncations, inserted and deleted bytes, line edits (CSV), header-card edits (FITS). Each
//! mutated file goes through `flowsift velocities`. The checks:
//! - no panic (exit 101 or the "internal error" line), no abort (a signal), no hang (a run
//!   over the time limit is killed and fails the test);
//! - a failed run says which file ("flowsift: error: PATH: …");
//! - a successful run writes as many rows as the input holds, counted independently of
//!   flowsift's reader: for CSV without quotes, the non-blank lines after the first line
//!   that is neither blank nor a comment; for FITS, the table header's NAXIS2; for Parquet,
//!   the row count in the file's footer.
//!
//! `cargo test --test fuzz_inputs` runs a few thousand cases in about a minute; a longer
//! run: `FLOWSIFT_FUZZ_CASES=20000 FLOWSIFT_FUZZ_SEED=7 cargo test --release --test fuzz_inputs`.

use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

use flowsift::catalogue::{read_table, write_table, Provenance, ReadOptions, WriteOptions};
use flowsift::mock::{generate, MockSpec};
use flowsift::physics::cosmology::{Cosmology, CosmologyParams};
use flowsift::physics::estimators::DlConvention;
use flowsift::physics::restframe::{default_apex, Boost};
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

/// Longest a run on a 40-row file may take before it counts as a hang.
const TIME_LIMIT: Duration = Duration::from_secs(30);

fn cases(default: usize) -> usize {
    std::env::var("FLOWSIFT_FUZZ_CASES")
        .ok()
        .and_then(|v| v.parse().ok())
        .map_or(default, |total: usize| total / 3)
}

fn seed() -> u64 {
    std::env::var("FLOWSIFT_FUZZ_SEED")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(20261202)
}

/// A 40-row mock catalogue written as `seed.EXT` in `dir`.
fn seed_file(dir: &Path, ext: &str) -> PathBuf {
    let cosmology = Cosmology::new(CosmologyParams::flat_lcdm(70.0, 0.3)).unwrap();
    let spec = MockSpec {
        n: 40,
        ..MockSpec::demo_survey()
    };
    let cmb = Boost::new(&default_apex("cmb")).unwrap();
    let mock = generate(&spec, &cosmology, &cmb, DlConvention::Full).unwrap();
    let path = dir.join(format!("seed.{ext}"));
    write_table(
        &path,
        &mock.to_table(),
        &Provenance::default(),
        &WriteOptions::default(),
    )
    .unwrap();
    path
}

/// Bytes a flip writes: the characters that change a file's structure, and any byte.
fn structural_byte(rng: &mut ChaCha8Rng) -> u8 {
    const PALETTE: &[u8] = b",\t\n\r\"# .-+eE0123456789abcdefNA\xff\xc3\x00";
    if rng.random_bool(0.8) {
        PALETTE[rng.random_range(0..PALETTE.len())]
    } else {
        rng.random()
    }
}

/// Mutations that apply to any file.
fn mutate_bytes(bytes: &mut Vec<u8>, rng: &mut ChaCha8Rng, focus: std::ops::Range<usize>) {
    let at = |rng: &mut ChaCha8Rng, len: usize| {
        if focus.end > focus.start && rng.random_bool(0.7) {
            rng.random_range(focus.start..focus.end.min(len))
        } else {
            rng.random_range(0..len)
        }
    };
    if bytes.is_empty() {
        return;
    }
    match rng.random_range(0..5) {
        0 | 1 => {
            for _ in 0..rng.random_range(1..4) {
                let i = at(rng, bytes.len());
                bytes[i] = structural_byte(rng);
            }
        }
        2 => {
            let keep = rng.random_range(0..bytes.len());
            bytes.truncate(keep);
        }
        3 => {
            let i = at(rng, bytes.len());
            let n = rng.random_range(1..8).min(bytes.len() - i);
            bytes.drain(i..i + n);
        }
        _ => {
            let i = at(rng, bytes.len());
            let b = structural_byte(rng);
            bytes.insert(i, b);
        }
    }
}

/// Line edits of a delimited text.
fn mutate_lines(text: &[u8], rng: &mut ChaCha8Rng) -> Vec<u8> {
    let mut lines: Vec<Vec<u8>> = text.split(|&b| b == b'\n').map(<[u8]>::to_vec).collect();
    if lines.last().is_some_and(Vec::is_empty) {
        lines.pop();
    }
    let n = lines.len();
    let pick = |rng: &mut ChaCha8Rng| rng.random_range(0..n);
    match rng.random_range(0..9) {
        0 => {
            let i = pick(rng);
            lines.insert(i, vec![]);
        }
        1 => lines.push(vec![]),
        2 => {
            let i = pick(rng);
            lines.remove(i);
        }
        3 => {
            let i = pick(rng);
            let copy = lines[i].clone();
            lines.insert(i, copy);
        }
        4 => {
            let i = pick(rng);
            lines[i].insert(0, b'#');
        }
        5 => {
            let i = pick(rng);
            lines[i].extend_from_slice(b",1.5");
        }
        6 => {
            let i = pick(rng);
            if let Some(p) = lines[i].iter().rposition(|&b| b == b',') {
                lines[i].truncate(p);
            }
        }
        7 => {
            // A header name repeated, or quoted with a doubled quote inside.
            let names: Vec<&[u8]> = lines[0].split(|&b| b == b',').collect();
            let j = rng.random_range(0..names.len());
            let mut header = lines[0].clone();
            if rng.random_bool(0.5) {
                header.push(b',');
                header.extend_from_slice(names[j]);
            } else {
                header.extend_from_slice(b",\"odd \"\"name\"\"\"");
            }
            lines[0] = header;
        }
        _ => {
            let i = pick(rng);
            lines.insert(i, b"# a comment line".to_vec());
        }
    }
    let eol: &[u8] = match rng.random_range(0..3) {
        0 => b"\n",
        1 => b"\r\n",
        _ => b"\r",
    };
    let mut out = Vec::with_capacity(text.len() + 64);
    for line in &lines {
        out.extend_from_slice(line);
        out.extend_from_slice(eol);
    }
    if rng.random_bool(0.2) {
        out.truncate(out.len() - eol.len());
    }
    out
}

/// Header-card edits of a FITS file: a keyword's value replaced.
fn mutate_cards(bytes: &mut [u8], rng: &mut ChaCha8Rng) {
    const KEYS: [&str; 6] = ["NAXIS2", "NAXIS1", "TFIELDS", "BITPIX", "PCOUNT", "TFORM1"];
    const VALUES: [&str; 10] = [
        "2147483648",
        "1000000000000",
        "9223372036854775807",
        "-1",
        "0",
        "1",
        "39",
        "41",
        "'1000D   '",
        "'X'",
    ];
    let key = KEYS[rng.random_range(0..KEYS.len())];
    let value = VALUES[rng.random_range(0..VALUES.len())];
    let header_end = bytes.len().min(2880 * 4);
    for card in (0..header_end / 80).map(|i| i * 80) {
        let name = String::from_utf8_lossy(&bytes[card..card + 8]);
        if name.trim_end() == key {
            let text = format!("{key:<8}= {value:>20}");
            let text = format!("{text:<80}");
            bytes[card..card + 80].copy_from_slice(text.as_bytes());
            return;
        }
    }
}

/// Rows the input holds, counted without flowsift's reader; `None` when this count does
/// not apply (a CSV with quotes).
fn independent_rows(path: &Path, bytes: &[u8]) -> Option<usize> {
    let ext = path.extension()?.to_str()?;
    match ext {
        "csv" => {
            if bytes.contains(&b'"') {
                return None;
            }
            let eol = if bytes.contains(&b'\n') { b'\n' } else { b'\r' };
            let blank = |l: &[u8]| l.iter().all(|&c| c == b' ' || c == b'\r' || c == b'\t');
            let mut lines = bytes.split(|&b| b == eol);
            lines.by_ref().find(|l| !blank(l) && l[0] != b'#')?;
            Some(lines.filter(|l| !blank(l)).count())
        }
        "fits" => {
            let header = &bytes[..bytes.len().min(2880 * 8)];
            header.chunks(80).find_map(|card| {
                let text = String::from_utf8_lossy(card);
                let (key, value) = text.split_once('=')?;
                (key.trim() == "NAXIS2").then(|| value.split('/').next()?.trim().parse().ok())?
            })
        }
        "parquet" => {
            let file = std::fs::File::open(path).ok()?;
            use polars::prelude::SerReader;
            let mut reader = polars::prelude::ParquetReader::new(file);
            reader.num_rows().ok()
        }
        _ => None,
    }
}

/// What one run showed.
enum Outcome {
    Ok,
    Refused,
}

/// Run `flowsift velocities` on `input`; panics (failing the test) on a crash, a hang, a
/// message that names no file, or a success whose output's rows differ from the input's.
fn check(input: &Path, out: &Path, bytes: &[u8], label: &str) -> Outcome {
    let mut child = Command::new(env!("CARGO_BIN_EXE_flowsift"))
        .args(["velocities", input.to_str().unwrap(), "-o"])
        .arg(out)
        .arg("--force")
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let start = Instant::now();
    let status = loop {
        if let Some(s) = child.try_wait().unwrap() {
            break s;
        }
        if start.elapsed() > TIME_LIMIT {
            child.kill().ok();
            panic!(
                "{label}: hang (over {TIME_LIMIT:?}); input kept at {}",
                input.display()
            );
        }
        std::thread::sleep(Duration::from_millis(2));
    };
    let mut stderr = String::new();
    use std::io::Read;
    child
        .stderr
        .take()
        .unwrap()
        .read_to_string(&mut stderr)
        .unwrap();
    let keep = |why: &str| -> ! {
        let kept = input.with_extension(format!(
            "failed.{}",
            input.extension().unwrap().to_string_lossy()
        ));
        std::fs::write(&kept, bytes).ok();
        panic!(
            "{label}: {why}\nstderr: {stderr}\ninput kept at {}",
            kept.display()
        );
    };
    match status.code() {
        None => keep("killed by a signal (abort)"),
        Some(101) => keep("panic"),
        _ if stderr.contains("internal error") => keep("panic"),
        Some(0) => {
            if let Some(expected) = independent_rows(input, bytes) {
                let written = read_table(out, &ReadOptions::default())
                    .unwrap_or_else(|e| keep(&format!("output unreadable: {e}")))
                    .frame
                    .height();
                if written != expected {
                    keep(&format!(
                        "{written} rows written, the input holds {expected}"
                    ));
                }
            }
            Outcome::Ok
        }
        Some(1) => {
            if !stderr.contains(&input.display().to_string()) {
                keep("the error does not name the file");
            }
            Outcome::Refused
        }
        Some(c) => keep(&format!("exit code {c}")),
    }
}

/// Mutate `seed` `n` times with `mutate` and check each case, two at a time.
fn fuzz(
    seed_path: &Path,
    n: usize,
    stream: u64,
    mutate: impl Fn(&[u8], &mut ChaCha8Rng) -> Vec<u8> + Sync,
) {
    let original = std::fs::read(seed_path).unwrap();
    let ext = seed_path.extension().unwrap().to_string_lossy().to_string();
    let dir = seed_path.parent().unwrap();
    let counts = std::sync::Mutex::new((0usize, 0usize));
    std::thread::scope(|scope| {
        for worker in 0..2u64 {
            let (original, ext, counts, mutate) = (&original, &ext, &counts, &mutate);
            scope.spawn(move || {
                for case in (worker as usize..n).step_by(2) {
                    let mut rng = ChaCha8Rng::seed_from_u64(seed());
                    rng.set_stream(stream * 1_000_000 + case as u64);
                    let bytes = mutate(original, &mut rng);
                    let input = dir.join(format!("case{worker}.{ext}"));
                    let out = dir.join(format!("case{worker}_out.csv"));
                    std::fs::write(&input, &bytes).unwrap();
                    let label = format!("{ext} case {case} (seed {})", seed());
                    let outcome = check(&input, &out, &bytes, &label);
                    let mut c = counts.lock().unwrap();
                    match outcome {
                        Outcome::Ok => c.0 += 1,
                        Outcome::Refused => c.1 += 1,
                    }
                }
            });
        }
    });
    let (ok, refused) = *counts.lock().unwrap();
    eprintln!("{ext}: {n} cases, {ok} ran, {refused} refused with a message");
    // Both kinds must occur, or the mutations test nothing.
    assert!(ok > 0 && refused > 0, "{ext}: {ok} ran, {refused} refused");
    let leftovers: Vec<_> = std::fs::read_dir(dir)
        .unwrap()
        .flatten()
        .filter(|e| {
            e.file_name()
                .to_string_lossy()
                .starts_with(".flowsift-partial-")
        })
        .collect();
    assert!(leftovers.is_empty(), "temporary files left: {leftovers:?}");
}

#[test]
fn mutated_csv_files_are_read_right_or_refused_clearly() {
    let dir = tempfile::tempdir().unwrap();
    let seed_path = seed_file(dir.path(), "csv");
    fuzz(&seed_path, cases(1500), 1, |original, rng| {
        let mut bytes = if rng.random_bool(0.5) {
            mutate_lines(original, rng)
        } else {
            original.to_vec()
        };
        if rng.random_bool(0.6) {
            mutate_bytes(&mut bytes, rng, 0..0);
        }
        bytes
    });
}

#[test]
fn mutated_fits_files_are_read_right_or_refused_clearly() {
    let dir = tempfile::tempdir().unwrap();
    let seed_path = seed_file(dir.path(), "fits");
    fuzz(&seed_path, cases(1200), 2, |original, rng| {
        let mut bytes = original.to_vec();
        if rng.random_bool(0.4) {
            mutate_cards(&mut bytes, rng);
        } else {
            // Most flips in the headers (primary and table), the rest anywhere.
            mutate_bytes(&mut bytes, rng, 0..2880 * 2);
        }
        bytes
    });
}

#[test]
fn mutated_parquet_files_are_read_right_or_refused_clearly() {
    let dir = tempfile::tempdir().unwrap();
    let seed_path = seed_file(dir.path(), "parquet");
    fuzz(&seed_path, cases(900), 3, |original, rng| {
        let mut bytes = original.to_vec();
        // The footer (schema, row groups) is at the end: aim half the edits there.
        let footer = original.len().saturating_sub(1500)..original.len();
        mutate_bytes(&mut bytes, rng, footer);
        bytes
    });
}
