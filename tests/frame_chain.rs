//! Rest-frame changes as a chain of boosts, and apices given in a user's apex file.
//!
//! Outside checks: the Planck 2018 CMB apex (Planck Collaboration I 2020, A&A 641, A1,
//! Table 2: 369.82 km/s towards l = 264.021°, b = 48.253°); the relativistic Doppler shift
//! of a moving observer, 1 + z_F = (1 + z_⊙)/[γ(1 − β cos θ)] (e.g. Rybicki & Lightman
//! 1979, §4.8; reference from memory); the additive correction cz_F = cz + v cos θ with
//! cos θ = sin b sin b_a + cos b cos b_a cos(l − l_a) (spherical law of cosines); and the IAU
//! 1976 Local-Group line cz_LG = cz + 300 sin l cos b (IAU Transactions 16B, 201; reference
//! from memory). The apex file is the shipped demo-data/apices.example.toml.

use std::path::{Path, PathBuf};

use assert_cmd::Command;
use flowsift::physics::redshift::{GalacticRest, Heliocentric, LocalGroup, Redshift};
use flowsift::physics::restframe::{chain_sum, legacy_additive, Apex, Boost, SOLAR_MOTION_UVW};
use flowsift::physics::sky::{Direction, Galactic};
use flowsift::plan::Shared;
use flowsift::settings::{FrameChoice, RunConfig};

const C: f64 = 299_792.458; // km/s, exact (SI)

fn flowsift() -> Command {
    Command::cargo_bin("flowsift").unwrap()
}

fn example_file() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("demo-data/apices.example.toml")
}

/// Frames resolved through the plan, as a run resolves them (the apex file read there).
fn resolved(frame: FrameChoice) -> Shared {
    let cfg = RunConfig {
        frame,
        ..Default::default()
    };
    Shared::resolve(None, None, &cfg, false).unwrap()
}

fn with_file(local_group: Option<&str>, galactic_rest: Option<&str>) -> FrameChoice {
    FrameChoice {
        apex_file: Some(example_file().display().to_string()),
        local_group: local_group.map(str::to_string),
        galactic_rest: galactic_rest.map(str::to_string),
        ..Default::default()
    }
}

/// The steps of the default chain add up to the Planck 2018 apex (Planck Collaboration I
/// 2020, Table 2), in speed and direction, and so do the steps with a Local Group apex from
/// the file: the chain only splits the Sun's motion relative to the CMB into boosts.
#[test]
fn the_steps_sum_to_the_cmb_apex() {
    for choice in [FrameChoice::default(), with_file(Some("yahil1977"), None)] {
        let shared = resolved(choice);
        let steps = shared.frames.chain();
        let names: Vec<_> = steps.iter().map(|s| (s.from, s.to)).collect();
        assert_eq!(
            names,
            [
                ("heliocentric", "lsr"),
                ("lsr", "galactic-rest"),
                ("galactic-rest", "local-group"),
                ("local-group", "cmb")
            ]
        );
        let [x, y, z] = chain_sum(&steps);
        let speed = (x * x + y * y + z * z).sqrt();
        assert!((speed - 369.82).abs() < 1e-9, "{speed}");
        let d = Direction::<Galactic>::from_cartesian(x, y, z).unwrap();
        let (l, b) = d.lon_lat_deg();
        assert!(
            (l - 264.021).abs() < 1e-9 && (b - 48.253).abs() < 1e-9,
            "{l} {b}"
        );
    }
}

/// The `frames --json` chain says the same: its sum is the Planck 2018 apex.
#[test]
fn frames_json_prints_the_chain() {
    let out = flowsift()
        .args(["frames", "--json", "--apex-file"])
        .arg(example_file())
        .args(["--local-group", "diaz2014"])
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let j: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let chain = j["chain"].as_array().unwrap();
    assert_eq!(chain.len(), 4);
    assert_eq!(chain[2]["apex"]["name"], "diaz2014");
    assert!(chain[2]["apex"]["source"]
        .as_str()
        .unwrap()
        .contains("Diaz"));
    let sum: Vec<f64> = j["chain_sum_km_s"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_f64().unwrap())
        .collect();
    let speed = sum.iter().map(|v| v * v).sum::<f64>().sqrt();
    assert!((speed - 369.82).abs() < 1e-9);
    assert_eq!(j["apex_file_apices"].as_array().unwrap().len(), 4);
    assert_eq!(j["cmb_dipoles"].as_array().unwrap().len(), 3);
}

/// Yahil, Tammann & Sandage (1977)'s 308 km/s towards l = 105°, b = −7°, given through the
/// apex file, is the published apex exactly, and moves a redshift as the published formulas
/// computed here directly: the relativistic Doppler shift for the exact boost and
/// cz_LG = cz + v cos θ for the additive one.
#[test]
fn a_file_apex_reproduces_the_published_local_group_apex() {
    let shared = resolved(with_file(Some("yahil1977"), None));
    let a = &shared.frames.local_group_apex;
    assert_eq!(
        (a.name.as_str(), a.speed_km_s, a.glon_deg, a.glat_deg),
        ("yahil1977", 308.0, 105.0, -7.0)
    );
    assert!(a.file.as_deref().unwrap().ends_with("apices.example.toml"));
    let boost = &shared.frames.local_group;
    let (la, ba) = (105.0_f64.to_radians(), (-7.0_f64).to_radians());
    let beta = 308.0 / C;
    let gamma = 1.0 / (1.0 - beta * beta).sqrt();
    for (l, b) in [
        (0.0, 0.0),
        (105.0, -7.0),
        (200.0, 45.0),
        (300.0, -60.0),
        (37.0, 80.0),
    ] {
        let n = Direction::<Galactic>::from_lon_lat_deg(l, b).unwrap();
        let (lr, br) = (f64::to_radians(l), f64::to_radians(b));
        let cos_theta = br.sin() * ba.sin() + br.cos() * ba.cos() * (lr - la).cos();
        for z in [0.001, 0.02, 0.1] {
            let zh = Redshift::<Heliocentric>::new(z).unwrap();
            let exact = (1.0 + z) / (gamma * (1.0 - beta * cos_theta)) - 1.0;
            let got = boost.from_heliocentric(zh, &n).value();
            assert!((got - exact).abs() < 1e-14, "{l} {b} {z}: {got} vs {exact}");
            let additive = legacy_additive(boost, zh, &n).unwrap().value() * C;
            assert!(
                (additive - (z * C + 308.0 * cos_theta)).abs() < 1e-8,
                "{l} {b} {z}"
            );
        }
    }
}

/// The IAU 1976 entry of the file gives, in the additive case, the published line
/// cz_LG = cz + 300 sin l cos b.
#[test]
fn the_iau1976_entry_is_the_published_line() {
    let shared = resolved(with_file(Some("iau1976"), None));
    let boost = &shared.frames.local_group;
    for (l, b) in [
        (0.0, 0.0),
        (90.0, 0.0),
        (135.0, 30.0),
        (250.0, -45.0),
        (310.0, 70.0),
    ] {
        let n = Direction::<Galactic>::from_lon_lat_deg(l, b).unwrap();
        let cz = 1500.0;
        let zh = Redshift::<Heliocentric>::new(cz / C).unwrap();
        let got = legacy_additive(boost, zh, &n).unwrap().value() * C;
        let line = cz + 300.0 * f64::to_radians(l).sin() * f64::to_radians(b).cos();
        assert!((got - line).abs() < 1e-8, "{l} {b}: {got} vs {line}");
    }
}

/// The file's Galactic-rest entry, given as a Cartesian velocity, is the solar motion of
/// Schönrich, Binney & Dehnen (2010) plus 220 km/s in V, bit for bit as computed from
/// those published numbers.
#[test]
fn a_cartesian_file_apex_is_the_published_sum() {
    let shared = resolved(with_file(None, Some("schoenrich2010-iau1985")));
    let [u, v, w] = SOLAR_MOTION_UVW;
    let direct = Apex::from_velocity("x", "galactic-rest", [u, v + 220.0, w], "").unwrap();
    let a = &shared.frames.galactic_rest_apex;
    assert_eq!(
        (a.speed_km_s, a.glon_deg, a.glat_deg),
        (direct.speed_km_s, direct.glon_deg, direct.glat_deg)
    );
    let n = Direction::<Galactic>::from_lon_lat_deg(123.0, 4.0).unwrap();
    let zh = Redshift::<Heliocentric>::new(0.01).unwrap();
    let ours = shared.frames.galactic_rest.from_heliocentric(zh, &n);
    let theirs = Boost::<GalacticRest>::new(&direct)
        .unwrap()
        .from_heliocentric(zh, &n);
    assert_eq!(ours.value(), theirs.value());
}

/// `galaxy` with the file's Local Group apex: the chain's Local-Group redshift is the
/// relativistic Doppler shift computed here from the published apex and the object's
/// Galactic position; the CMB step still ends on the Planck 2018 z_cmb.
#[test]
fn galaxy_prints_the_chain_with_a_file_apex() {
    let out = flowsift()
        .args([
            "galaxy",
            "--ra",
            "150.1",
            "--dec",
            "2.2",
            "--z-helio",
            "0.0231",
            "--mu",
            "34.85",
            "--json",
            "--local-group",
            "yahil1977",
            "--apex-file",
        ])
        .arg(example_file())
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let j: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let chain = j["frame_chain"].as_array().unwrap();
    assert_eq!(chain.len(), 4);
    assert_eq!(chain[2]["to"], "local-group");
    let (l, b) = (j["glon"].as_f64().unwrap(), j["glat"].as_f64().unwrap());
    let (lr, br) = (l.to_radians(), b.to_radians());
    let (la, ba) = (105.0_f64.to_radians(), (-7.0_f64).to_radians());
    let cos_theta = br.sin() * ba.sin() + br.cos() * ba.cos() * (lr - la).cos();
    let beta = 308.0 / C;
    let gamma = 1.0 / (1.0 - beta * beta).sqrt();
    let expected = 1.0231 / (gamma * (1.0 - beta * cos_theta)) - 1.0;
    let got = chain[2]["z"].as_f64().unwrap();
    assert!((got - expected).abs() < 1e-12, "{got} vs {expected}");
    assert_eq!(chain[3]["z"], j["z_cmb"]);
    assert!(j["cautions"].to_string().contains("yahil1977"));
    let text = flowsift()
        .args([
            "galaxy",
            "--ra",
            "150.1",
            "--dec",
            "2.2",
            "--z-helio",
            "0.0231",
            "--mu",
            "34.85",
        ])
        .output()
        .unwrap();
    let text = String::from_utf8(text.stdout).unwrap();
    for frame in ["→ lsr", "→ galactic-rest", "→ local-group", "→ cmb"] {
        assert!(text.contains(frame), "{text}");
    }
    assert!(text.contains("Planck Collaboration I (2020)"));
}

fn bad_file(dir: &Path, text: &str) -> PathBuf {
    let p = dir.join("mine.toml");
    std::fs::write(&p, text).unwrap();
    p
}

/// A bad apex file stops the run with an error naming the file, the entry and the key, and
/// never a panic.
#[test]
fn bad_apex_files_name_file_entry_and_key() {
    let dir = tempfile::tempdir().unwrap();
    let good = std::fs::read_to_string(example_file()).unwrap();
    for (text, entry, key) in [
        (
            good.replace("b_deg = -7.0", "b_deg = -107.0"),
            "entry 1 ('yahil1977')",
            "b_deg",
        ),
        (
            good.replace("speed_km_s = 299.0", "speed_km_s = \"fast\""),
            "entry 2 ('diaz2014')",
            "speed_km_s",
        ),
        (
            good.replace(
                "frame = \"local-group\"\nname = \"iau1976\"",
                "frame = \"local-grp\"\nname = \"iau1976\"",
            ),
            "entry 3 ('iau1976')",
            "frame",
        ),
        (
            good.replace(
                "galactic_xyz_km_s = [11.1, 232.24, 7.25]",
                "galactic_xyz = [11.1, 232.24, 7.25]",
            ),
            "entry 4",
            "galactic_xyz",
        ),
    ] {
        let p = bad_file(dir.path(), &text);
        let out = flowsift()
            .args(["frames", "--apex-file"])
            .arg(&p)
            .output()
            .unwrap();
        assert!(!out.status.success());
        let err = String::from_utf8_lossy(&out.stderr);
        assert!(err.contains(&p.display().to_string()), "{err}");
        assert!(err.contains(entry), "{err}");
        assert!(err.contains(&format!("key '{key}'")), "{err}");
        assert!(!err.contains("panicked"), "{err}");
    }
    // A name the file does not hold, and a missing file.
    let out = flowsift()
        .args(["frames", "--local-group", "nowhere", "--apex-file"])
        .arg(example_file())
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        !out.status.success() && err.contains("nowhere") && err.contains("yahil1977"),
        "{err}"
    );
    let out = flowsift()
        .args(["frames", "--apex-file"])
        .arg(dir.path().join("absent.toml"))
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        !out.status.success() && err.contains("absent.toml"),
        "{err}"
    );
}

/// A run file's apex_file is found beside the run file, and selections there apply.
#[test]
fn a_run_file_names_an_apex_file_beside_it() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::copy(example_file(), dir.path().join("apices.toml")).unwrap();
    let run = dir.path().join("run.toml");
    std::fs::write(
        &run,
        "[frame]\napex_file = \"apices.toml\"\nlocal_group = \"diaz2014\"\n",
    )
    .unwrap();
    let cfg = flowsift::plan::merge_run_file(Some(&run), &RunConfig::default()).unwrap();
    let shared = Shared::resolve(None, None, &cfg, false).unwrap();
    assert_eq!(shared.frames.local_group_apex.name, "diaz2014");
    let lg = Boost::<LocalGroup>::new(&shared.frames.local_group_apex).unwrap();
    assert!((lg.speed_km_s() - 299.0).abs() < 1e-9);
}

/// The record of a run keeps the apices used, and for the apex file its path and the
/// entries used (only those), so a later step needs no file to redo the frames.
#[test]
fn the_record_keeps_the_apices_used() {
    let shared = resolved(with_file(Some("yahil1977"), None));
    let rec = shared.record("velocities", "flowsift velocities", &[]);
    let used = &rec.details["apices_used"];
    for name in [
        "schoenrich2010",
        "schoenrich2010-eilers2019",
        "yahil1977",
        "planck2018",
    ] {
        assert!(used.contains(&format!("\"{name}\"")), "{used}");
    }
    assert!(rec.details["apex_file"].ends_with("apices.example.toml"));
    let frame = &rec.settings.frame;
    assert_eq!(frame.local_group.as_deref(), Some("yahil1977"));
    assert_eq!(frame.apices.len(), 1, "{:?}", frame.apices);
    assert_eq!(frame.apices[0].name, "yahil1977");
    // Resolving the recorded choice alone (no file) gives the same frames.
    let again = frame.resolve().unwrap();
    assert_eq!(again.signature(), shared.frames.signature());
    let prov = rec.to_provenance();
    assert!(prov
        .entries
        .iter()
        .any(|(k, v)| k == "apices_used" && v.contains("yahil1977")));
}

/// The apex file is an input: no output may overwrite it, even with --force; and a later
/// step on the output inherits the file's apex from the record without reading the file.
#[test]
fn the_apex_file_is_an_input_and_travels_in_the_record() {
    let dir = tempfile::tempdir().unwrap();
    let survey = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("demo-data/lantern_survey.csv");
    let apices = dir.path().join("apices.csv");
    std::fs::copy(example_file(), &apices).unwrap();
    let before = std::fs::read(&apices).unwrap();
    let out = flowsift()
        .arg("velocities")
        .arg(&survey)
        .arg("-o")
        .arg(&apices)
        .arg("--force")
        .arg("--apex-file")
        .arg(&apices)
        .output()
        .unwrap();
    assert!(!out.status.success());
    assert!(String::from_utf8_lossy(&out.stderr).contains("apex file"));
    assert_eq!(std::fs::read(&apices).unwrap(), before);

    let first = dir.path().join("v.csv");
    let out = flowsift()
        .arg("velocities")
        .arg(&survey)
        .arg("-o")
        .arg(&first)
        .args(["--local-group", "yahil1977", "--apex-file"])
        .arg(&apices)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    std::fs::remove_file(&apices).unwrap();
    let out = flowsift()
        .arg("outliers")
        .arg(&first)
        .arg("-o")
        .arg(dir.path().join("o.csv"))
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let said = format!(
        "{}{}",
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(said.contains("'yahil1977'"), "{said}");
}
