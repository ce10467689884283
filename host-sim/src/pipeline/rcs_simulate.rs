//! `sweepgate simulate-rcs`: an RCS scene ([`crate::model::rcs_scene`]) measured as the
//! range would measure it, written as the files `sweepgate rcs` reads: `target.csv` and
//! `background.csv` (manifests of per-angle 2-port Touchstone files under `sweeps/`),
//! `reference.s2p` (the reference sphere at the turntable axis) and
//! `reference_background.s2p` (the mount alone at 0°). Each measurement has its own noise.

use std::path::{Path, PathBuf};

use anyhow::Context;
use num_complex::Complex64;

use crate::formats::files::{check_output_dir, read_capped, write_set};
use crate::formats::manifest::manifest_text;
use crate::formats::touchstone::s21_two_port_text;
use crate::model::rcs_scene::{Noise, RcsScene, Scatterer};

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

/// One measurement: the fixed part, `items` at `angle_deg`, and noise.
fn measure(
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

/// The files of a simulated RCS scan of `scene`, in memory.
pub fn scan_files(scene: &RcsScene) -> anyhow::Result<Vec<(String, Vec<u8>)>> {
    let f = scene.frequencies_hz();
    let mut noise = Noise::new(scene.seed);
    let with_target: Vec<Scatterer> = scene.mount.iter().chain(&scene.target).cloned().collect();
    let touch = |what: &str, v: &[Complex64]| -> Vec<u8> {
        s21_two_port_text(&[format!("sweepgate simulate-rcs: {what}")], &f, v).into_bytes()
    };
    let (mut files, mut rows_t, mut rows_b) = (Vec::new(), Vec::new(), Vec::new());
    for (i, a) in scene.angles().into_iter().enumerate() {
        let (t, b) = (format!("sweeps/t{i:04}.s2p"), format!("sweeps/b{i:04}.s2p"));
        let target = measure(scene, &with_target, a, &mut noise)?;
        let background = measure(scene, &scene.mount, a, &mut noise)?;
        files.push((t.clone(), touch(&format!("target at {a}°"), &target)));
        files.push((
            b.clone(),
            touch(&format!("background at {a}°"), &background),
        ));
        rows_t.push((a, t));
        rows_b.push((a, b));
    }
    let sphere = Scatterer::Sphere {
        at_m: [0.0; 3],
        diameter_m: scene.reference_sphere_m,
    };
    let mut reference_items = scene.mount.clone();
    reference_items.push(sphere);
    let reference = measure(scene, &reference_items, 0.0, &mut noise)?;
    let reference_bg = measure(scene, &scene.mount, 0.0, &mut noise)?;
    files.push((
        "reference.s2p".into(),
        touch("reference sphere at 0°", &reference),
    ));
    files.push((
        "reference_background.s2p".into(),
        touch("reference's background at 0°", &reference_bg),
    ));
    files.push(("target.csv".into(), manifest_text(&rows_t).into_bytes()));
    files.push(("background.csv".into(), manifest_text(&rows_b).into_bytes()));
    Ok(files)
}

/// Simulates `scenario` into the folder `out`; returns the files written.
pub fn run(scenario: &Path, out: &Path) -> anyhow::Result<Vec<PathBuf>> {
    let scene = read_scene(scenario)?;
    let files = scan_files(&scene)?;
    let sweeps = out.join("sweeps");
    std::fs::create_dir_all(&sweeps).with_context(|| format!("making {}", sweeps.display()))?;
    check_output_dir(out)?;
    let set: Vec<(PathBuf, Vec<u8>)> = files.into_iter().map(|(n, b)| (out.join(n), b)).collect();
    write_set(&set)?;
    Ok(set.into_iter().map(|(p, _)| p).collect())
}
