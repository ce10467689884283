//! Every shipped scenario parses, validates without warnings, and simulates.

use std::path::PathBuf;

use sweepgate_host::formats::recording::{recover, Record, Stop};
use sweepgate_host::model::scenario::{Mode, Scenario};
use sweepgate_host::pipeline::simulate::{simulate_to, simulate_to_file};

fn shipped() -> Vec<PathBuf> {
    let dir = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("scenarios");
    let mut v: Vec<_> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().is_some_and(|x| x == "toml"))
        .collect();
    v.sort();
    v
}

/// The same scenario over a few degrees only (a fast test scan).
fn shortened(mut s: Scenario) -> Scenario {
    let q = &mut s.positioner;
    q.start_deg = -4.0;
    q.stop_deg = 4.0;
    if q.mode == Mode::Step {
        q.step_deg = Some(2.0);
    }
    s.validate().unwrap();
    s
}

#[test]
fn there_are_the_promised_scenarios() {
    let names: Vec<String> = shipped()
        .iter()
        .map(|p| p.file_stem().unwrap().to_string_lossy().into_owned())
        .collect();
    for want in [
        "demo-lab",
        "outdoor-ground",
        "workshop-bay",
        "example-annotated",
    ] {
        assert!(
            names.iter().any(|n| n == want),
            "{want} missing from {names:?}"
        );
    }
    // The outdoor range has exactly one echo (the ground); the workshop has floor,
    // ceiling and walls.
    let outdoor = Scenario::load(
        &shipped()
            .into_iter()
            .find(|p| p.ends_with("outdoor-ground.toml"))
            .unwrap(),
    )
    .unwrap();
    assert_eq!(outdoor.planes.len(), 1);
    assert!(outdoor.scatterers.is_empty());
    let bay = Scenario::load(
        &shipped()
            .into_iter()
            .find(|p| p.ends_with("workshop-bay.toml"))
            .unwrap(),
    )
    .unwrap();
    for axis in ["X", "Y", "Z"] {
        assert!(
            bay.planes
                .iter()
                .filter(|p| format!("{:?}", p.axis) == axis)
                .count()
                == 2
        );
    }
}

#[test]
fn every_shipped_scenario_parses_and_simulates() {
    for path in shipped() {
        let s = Scenario::load(&path).unwrap();
        assert!(
            s.warnings().is_empty(),
            "{}: {:?}",
            path.display(),
            s.warnings()
        );
        let s = shortened(s);
        let (bytes, sum) = simulate_to(&s, None, 1, Vec::new(), false).unwrap();
        assert_eq!(sum.bytes as usize, bytes.len());
        let r = recover(&bytes);
        assert_eq!(r.stop, Stop::Complete, "{}", path.display());
        assert_eq!(r.header().unwrap().scenario.as_ref(), Some(&s));
        let sweeps: Vec<_> = r
            .records
            .iter()
            .filter_map(|(_, x)| match x {
                Record::Sweep { s21, .. } => Some(s21),
                _ => None,
            })
            .collect();
        assert_eq!(sweeps.len(), s.expected_sweeps());
        assert_eq!(sweeps.len() as u64, sum.sweeps);
        assert!(sweeps
            .iter()
            .all(|v| v.len() == s.sweep.points
                && v.iter().all(|c| c.re.is_finite() && c.im.is_finite())));
        assert!(sweeps.iter().all(|v| v.iter().any(|c| c.norm() > 0.0)));
    }
}

#[test]
fn the_same_seed_gives_the_same_file() {
    let path = shipped()
        .into_iter()
        .find(|p| p.ends_with("demo-lab.toml"))
        .unwrap();
    let s = shortened(Scenario::load(&path).unwrap());
    let a = simulate_to(&s, None, 9, Vec::new(), false).unwrap().0;
    let b = simulate_to(&s, None, 9, Vec::new(), false).unwrap().0;
    let c = simulate_to(&s, None, 10, Vec::new(), false).unwrap().0;
    assert_eq!(a, b);
    assert_ne!(a, c);
    let dir = std::env::temp_dir().join(format!("sweepgate-sim-test-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let out = dir.join("lab.rec");
    simulate_to_file(&s, None, 9, &out, false).unwrap();
    assert_eq!(std::fs::read(&out).unwrap(), a);
    std::fs::remove_dir_all(&dir).unwrap();
}
