//! `sweepgate simulate-rcs`: an RCS scene ([`crate::model::rcs_scene`]) measured as the
//! range would measure it, written as the files `sweepgate rcs` reads: `target.csv` and
//! `background.csv` (manifests of per-angle 2-port Touchstone files under `sweeps/`),
//! `reference.s2p` (the reference sphere at the turntable axis) and
//! `reference_background.s2p` (the mount alone at 0°). Each measurement has its own noise.
//! With `--recording` the same measurements are written as recordings instead, one per
//! measurement (`target.rec`, `background.rec`, `reference.rec`,
//! `reference_background.rec`; [`crate::pipeline::rcs_recording`]).

use std::path::{Path, PathBuf};

use anyhow::Context;
use num_complex::Complex64;
use sweepgate::grid::Grid;

use crate::formats::files::{check_output_dir, read_capped, write_set};
use crate::formats::manifest::manifest_text;
use crate::formats::rcs_record::Measurement;
use crate::formats::touchstone::s21_two_port_text;
use crate::model::rcs_scene::{Noise, RcsScene, Scatterer};
use crate::pipeline::rcs_recording::measurement_bytes;

/// Largest scene file read, bytes.
const MAX_SCENE_BYTES: u64 = 1 << 20;

/// Reads a scene from its TOML file.
pub fn read_scene(path: &Path) -> anyhow::Result<RcsScene> {
    let bytes = read_capped(path, MAX_SCENE_BYTES, "RCS scene")?;
    let text =
        String::from_utf8(bytes).with_context(|| format!("{}: not UTF-8", path.display()))?;
    let scene: RcsScene = toml::from_str(&text).with_context(|| format!("{}", path.display()))?;
    let ok = scene.points >= 2
        && scene.points <= crate::limits::MAX_POINTS
        && scene.stop_hz > scene.start_hz
        && scene.start_hz > 0.0
        && scene.distance_m > 0.0
        && scene.angles().len() <= crate::limits::MAX_BINS;
    anyhow::ensure!(
        ok,
        "{}: needs 2 to {} points, 0 < start_hz < stop_hz, distance_m above 0 and at most {} angles",
        path.display(),
        crate::limits::MAX_POINTS,
        crate::limits::MAX_BINS
    );
    Ok(scene)
}

/// What is in the zone for each measurement: the mount always; the target for the target
/// run; the reference sphere at the turntable axis for the reference run.
pub fn items(scene: &RcsScene, what: Measurement) -> Vec<Scatterer> {
    let mut all = scene.mount.clone();
    match what {
        Measurement::Target => all.extend(scene.target.iter().cloned()),
        Measurement::Reference => all.push(Scatterer::Sphere {
            at_m: [0.0; 3],
            diameter_m: scene.reference_sphere_m,
        }),
        Measurement::Background | Measurement::ReferenceBackground => {}
    }
    all
}

/// One measurement: the fixed part, `items` at `angle_deg`, and noise.
pub fn measure(
    scene: &RcsScene,
    items: &[Scatterer],
    angle_deg: f64,
    noise: &mut Noise,
) -> anyhow::Result<Vec<Complex64>> {
    let rms = 10f64.powf(scene.noise_db / 20.0);
    let s = scene
        .s21_of(items, angle_deg)
        .context("a scatterer of the scene")?;
    Ok(scene
        .fixed()
        .iter()
        .zip(s)
        .map(|(a, b)| a + b + noise.complex(rms))
        .collect())
}

/// The four measurements of a simulated RCS scan, before they are written.
#[derive(Debug, Clone, PartialEq)]
pub struct Measurements {
    /// The frequencies, Hz.
    pub frequencies_hz: Vec<f64>,
    /// The target (mount and target) at each angle.
    pub target: Vec<(f64, Vec<Complex64>)>,
    /// The background (mount alone) at each angle.
    pub background: Vec<(f64, Vec<Complex64>)>,
    /// The reference sphere on the mount at 0°.
    pub reference: Vec<Complex64>,
    /// The mount alone at 0°, for the reference.
    pub reference_background: Vec<Complex64>,
}

/// Measures the scene: per angle the target then the background, then the reference and
/// its background, each with its own noise from the scene's seed, in that order.
pub fn measure_scan(scene: &RcsScene) -> anyhow::Result<Measurements> {
    let mut noise = Noise::new(scene.seed);
    let with_target = items(scene, Measurement::Target);
    let (mut target, mut background) = (Vec::new(), Vec::new());
    for a in scene.angles() {
        target.push((a, measure(scene, &with_target, a, &mut noise)?));
        background.push((a, measure(scene, &scene.mount, a, &mut noise)?));
    }
    let reference_items = items(scene, Measurement::Reference);
    let reference = measure(scene, &reference_items, 0.0, &mut noise)?;
    let reference_background = measure(scene, &scene.mount, 0.0, &mut noise)?;
    Ok(Measurements {
        frequencies_hz: scene.frequencies_hz(),
        target,
        background,
        reference,
        reference_background,
    })
}

/// The files of a simulated RCS scan of `scene`, in memory.
pub fn scan_files(scene: &RcsScene) -> anyhow::Result<Vec<(String, Vec<u8>)>> {
    let m = measure_scan(scene)?;
    let f = &m.frequencies_hz;
    let touch = |what: &str, v: &[Complex64]| -> Vec<u8> {
        s21_two_port_text(&[format!("sweepgate simulate-rcs: {what}")], f, v).into_bytes()
    };
    let (mut files, mut rows_t, mut rows_b) = (Vec::new(), Vec::new(), Vec::new());
    for (i, ((a, target), (_, background))) in m.target.iter().zip(&m.background).enumerate() {
        let (t, b) = (format!("sweeps/t{i:04}.s2p"), format!("sweeps/b{i:04}.s2p"));
        files.push((t.clone(), touch(&format!("target at {a}°"), target)));
        files.push((b.clone(), touch(&format!("background at {a}°"), background)));
        rows_t.push((*a, t));
        rows_b.push((*a, b));
    }
    files.push((
        "reference.s2p".into(),
        touch("reference sphere at 0°", &m.reference),
    ));
    files.push((
        "reference_background.s2p".into(),
        touch("reference's background at 0°", &m.reference_background),
    ));
    files.push(("target.csv".into(), manifest_text(&rows_t).into_bytes()));
    files.push(("background.csv".into(), manifest_text(&rows_b).into_bytes()));
    Ok(files)
}

/// The recordings of a simulated RCS scan of `scene`, in memory: `target.rec`,
/// `background.rec`, `reference.rec` and `reference_background.rec`, the same
/// measurements [`scan_files`] writes as Touchstone files.
pub fn scan_recordings(
    scene: &RcsScene,
    scene_name: Option<String>,
) -> anyhow::Result<Vec<(String, Vec<u8>)>> {
    let m = measure_scan(scene)?;
    let f = &m.frequencies_hz;
    let grid = Grid::from_start_stop(f[0], f[f.len() - 1], f.len())
        .context("the scene's frequency grid")?;
    let at_zero = |v: &[Complex64]| vec![(0.0, v.to_vec())];
    let parts = [
        (Measurement::Target, m.target.clone()),
        (Measurement::Background, m.background.clone()),
        (Measurement::Reference, at_zero(&m.reference)),
        (
            Measurement::ReferenceBackground,
            at_zero(&m.reference_background),
        ),
    ];
    parts
        .into_iter()
        .map(|(what, rows)| {
            let bytes = measurement_bytes(&grid, &rows, what, scene_name.clone())?;
            Ok((format!("{}.rec", what.word()), bytes))
        })
        .collect()
}

/// Simulates `scenario` into the folder `out` as Touchstone files and manifests; returns
/// the files written.
pub fn run(scenario: &Path, out: &Path) -> anyhow::Result<Vec<PathBuf>> {
    write(scenario, out, false)
}

/// Simulates `scenario` into the folder `out` as recordings, one per measurement; returns
/// the files written.
pub fn run_recordings(scenario: &Path, out: &Path) -> anyhow::Result<Vec<PathBuf>> {
    write(scenario, out, true)
}

fn write(scenario: &Path, out: &Path, recordings: bool) -> anyhow::Result<Vec<PathBuf>> {
    let scene = read_scene(scenario)?;
    let files = if recordings {
        let name = scenario
            .file_name()
            .map(|n| n.to_string_lossy().into_owned());
        scan_recordings(&scene, name)?
    } else {
        let sweeps = out.join("sweeps");
        std::fs::create_dir_all(&sweeps).with_context(|| format!("making {}", sweeps.display()))?;
        scan_files(&scene)?
    };
    check_output_dir(out)?;
    let set: Vec<(PathBuf, Vec<u8>)> = files.into_iter().map(|(n, b)| (out.join(n), b)).collect();
    write_set(&set)?;
    Ok(set.into_iter().map(|(p, _)| p).collect())
}
