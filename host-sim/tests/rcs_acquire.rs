//! An RCS scan acquired from the simulated instrument: `sweepgate instrument --rcs-scenario
//! FILE --measurement WHAT --turntable ADDR` measures the RCS scene at the angle the
//! simulated turntable (`sweepgate positioner`) stands at; `acquire --drive` steps the
//! turntable and records the target, the background, the reference and its background;
//! `rcs` on the four recordings gives the target sphere's RCS within 0.5 dB of its Mie
//! series (the simulator's truth; the series is checked against scipy in rcs_targets.rs).

mod instrument_support;

use std::io::{BufRead, BufReader};
use std::path::Path;
use std::process::{Child, Command, Stdio};

use instrument_support::{start, temp_dir};
use sweepgate::rcs::Zone;
use sweepgate_host::formats::rcs_record::Measurement;
use sweepgate_host::model::rcs_scene::Scatterer;
use sweepgate_host::model::rcs_targets::ReferenceTarget;
use sweepgate_host::pipeline::options::{default_band_window, DEFAULT_GATE_SHAPE};
use sweepgate_host::pipeline::rcs::{self, RcsGate, RcsSettings};
use sweepgate_host::pipeline::rcs_input::{self, RcsFiles};
use sweepgate_host::pipeline::rcs_simulate;

/// A running `sweepgate positioner`, killed on drop.
struct Table {
    child: Child,
    addr: String,
}

impl Drop for Table {
    fn drop(&mut self) {
        self.child.kill().ok();
        self.child.wait().ok();
    }
}

fn table() -> Table {
    let mut child = Command::new(env!("CARGO_BIN_EXE_sweepgate"))
        .args(["positioner", "--port", "0"])
        .stdout(Stdio::piped())
        .stderr(Stdio::null())
        .spawn()
        .unwrap();
    let mut line = String::new();
    BufReader::new(child.stdout.take().unwrap())
        .read_line(&mut line)
        .unwrap();
    let addr = line
        .trim()
        .strip_prefix("listening on ")
        .unwrap()
        .to_owned();
    Table { child, addr }
}

/// Acquires one measurement of `scene` over `steps`, into `out`.
fn acquire(scene: &Path, what: Measurement, table: &Table, steps: &str, out: &Path) {
    let scene = scene.to_str().unwrap();
    let inst = start(
        &format!("rcs-acq-{}", what.word()),
        &[
            "--rcs-scenario",
            scene,
            "--measurement",
            what.word(),
            "--turntable",
            &table.addr,
        ],
    );
    let o = Command::new(env!("CARGO_BIN_EXE_sweepgate"))
        .arg("acquire")
        .args(["--instrument", &inst.addr, "--drive", &table.addr])
        .arg(format!("--steps={steps}"))
        .args(["--move-speed-deg-s", "20", "--settle-tolerance-deg", "0.02"])
        // Angles to the nearest 2°: the target and background runs meet at the same angles.
        .args(["--bin-width-deg", "2"])
        // The live engine's gate (the zone's two-way delay); the recording is what counts.
        .args(["--gate-center-ns", "28.2", "--gate-span-ns", "6"])
        .arg("--out")
        .arg(out)
        .output()
        .unwrap();
    assert!(
        o.status.success(),
        "{}: {}",
        what.word(),
        String::from_utf8_lossy(&o.stderr)
    );
}

#[test]
fn an_acquired_rcs_scan_gives_the_spheres_rcs() {
    let dir = temp_dir("rcs-acquire");
    let text = std::fs::read_to_string(
        Path::new(env!("CARGO_MANIFEST_DIR")).join("scenarios/rcs/range.toml"),
    )
    .unwrap();
    // The shipped scene over five angles, to keep the test short.
    let scene_path = dir.join("scene.toml");
    let text = text.replace("[-10.0, 10.0, 0.5]", "[-4.0, 4.0, 2.0]");
    std::fs::write(&scene_path, text).unwrap();
    let scene = rcs_simulate::read_scene(&scene_path).unwrap();
    let [Scatterer::Sphere { diameter_m, .. }] = scene.target.as_slice() else {
        panic!("the shipped scene's target is one sphere");
    };
    let t = table();
    let path = |m: Measurement| dir.join(format!("{}.rec", m.word()));
    for m in Measurement::ALL {
        let steps = match m {
            Measurement::Target | Measurement::Background => "-4:4:2",
            _ => "-2:2:2",
        };
        acquire(&scene_path, m, &t, steps, &path(m));
    }
    let names = Measurement::ALL.map(path);
    let files = RcsFiles {
        target: &names[0],
        background: Some(&names[1]),
        reference: &names[2],
        reference_background: Some(&names[3]),
    };
    let reference = ReferenceTarget::Sphere {
        diameter_m: scene.reference_sphere_m,
    };
    let input = rcs_input::read(&files, reference).unwrap();
    let settings = RcsSettings {
        gate: RcsGate::Zone {
            zone: Zone {
                time_zero_s: scene.time_zero_ns * 1e-9,
                distance_m: scene.distance_m,
                size_m: 0.6,
                separation_m: scene.separation_m,
            },
            echoes_s: vec![scene.delay_s([-scene.distance_m, 0.0, 0.0])],
        },
        band_window: default_band_window(),
        gate_shape: DEFAULT_GATE_SHAPE,
        frequencies_hz: vec![10e9],
    };
    let result = rcs::process(&input, &settings).unwrap();
    assert_eq!(result.angles_deg, vec![-4.0, -2.0, 0.0, 2.0, 4.0]);
    let sphere = ReferenceTarget::Sphere {
        diameter_m: *diameter_m,
    };
    // Inner 80 % of the band: the gate's renormalization leaves its residual errors in the
    // outer 10 % at each end (as in rcs_simulator.rs).
    let k = result.grid.points();
    let mut worst = 0.0f64;
    for row in &result.calibrated {
        for (i, v) in row.iter().enumerate().take(k - k / 10).skip(k / 10) {
            let exact = 10.0 * sphere.rcs_m2(result.grid.frequency_hz(i)).unwrap().log10();
            worst = worst.max((rcs::dbsm(*v) - exact).abs());
        }
    }
    println!(
        "acquired RCS scan, {} m sphere: worst |RCS − Mie| {worst:.3} dB over {} angles × {} points",
        diameter_m,
        result.angles_deg.len(),
        k - 2 * (k / 10)
    );
    assert!(worst < 0.5, "{worst}");
}
