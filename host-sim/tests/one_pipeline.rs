//! One pipeline: the same data, gated by different commands with their default options,
//! gives the same values.
//!
//! - A scan recorded by `acquire` against the simulated instrument, with the simulated
//!   positioner of the same scenario, is gated three ways: by `acquire`'s live engine while
//!   recording, by `replay` of the recording and by `process` of the recording. The bins
//!   must agree to 1e-5 relative (the agreement the board and the host engine are held to).
//!   The comparison can fail: `acquire` run with the band window and gate shape its live
//!   engine used to default to (Kaiser β = 6, Tukey α = 0.5) gives bins far outside it.
//! - `plan`, `replay` and `process` report the same gate (center and span) for every
//!   shipped scenario, including one whose `[plan] band_window` differs from the default.
//! - `simulate` writes its truth at the bins the set-up gives every command.
//!
//! Source for the tolerance: common practice, no source (1e-5 relative is f32 rounding of
//! a few operations; the paths here run the same engine on the same records).

mod instrument_support;

use std::path::{Path, PathBuf};
use std::sync::atomic::AtomicBool;

use num_complex::Complex64;
use sweepgate::window::WindowKind;
use sweepgate_host::formats::recording::recover_file;
use sweepgate_host::link::acquire::{acquire, AngleSource, Profile, Request, SIMULATED_PROFILE};
use sweepgate_host::model::scenario::{Mode, Scenario};
use sweepgate_host::output::report::ReportBin;
use sweepgate_host::pipeline::options::{
    default_band_window, describe_window, format_window, parse_window, Choices, DEFAULT_GATE_SHAPE,
};
use sweepgate_host::pipeline::plan::{parse_plan_source, plan_report, Overrides};
use sweepgate_host::pipeline::process;
use sweepgate_host::pipeline::replay::{self, replay_records};
use sweepgate_host::pipeline::setup::{truth_points, BinSpec};
use sweepgate_host::pipeline::simulate::simulate_to_file;

/// Largest relative difference allowed between the gated values of two commands.
const TOLERANCE: f64 = 1e-5;

/// A shipped scenario cut to ±`half_deg` around boresight, written next to the test.
fn cut(name: &str, half_deg: f64, dir: &Path) -> (Scenario, PathBuf) {
    let path = Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("scenarios")
        .join(format!("{name}.toml"));
    let mut s = Scenario::load(&path).unwrap();
    s.positioner.start_deg = -half_deg;
    s.positioner.stop_deg = half_deg;
    s.validate().unwrap();
    let p = dir.join(format!("{name}-cut.toml"));
    std::fs::write(&p, toml::to_string(&s).unwrap()).unwrap();
    (s, p)
}

/// |a − b| / max(|a|, |b|), 0 when both are 0.
fn relative(a: Complex64, b: Complex64) -> f64 {
    let m = a.norm().max(b.norm());
    if m == 0.0 {
        0.0
    } else {
        (a - b).norm() / m
    }
}

/// The largest relative difference of raw and gated values and of the echo level (as an
/// energy ratio) between two sets of bins; the bins must be the same (count, angles,
/// sweeps).
fn largest_difference(what: &str, a: &[ReportBin], b: &[ReportBin]) -> f64 {
    assert_eq!(a.len(), b.len(), "{what}: bin counts");
    let mut worst = 0.0f64;
    for (x, y) in a.iter().zip(b) {
        assert_eq!(x.angle_deg, y.angle_deg, "{what}: bin angles");
        assert_eq!(
            x.sweeps, y.sweeps,
            "{what}: sweeps in the bin at {}°",
            x.angle_deg
        );
        assert_eq!(x.values.len(), y.values.len(), "{what}: frequencies");
        if let (Some(e), Some(f)) = (x.echo_db, y.echo_db) {
            let ratio = |db: f64| Complex64::new(10f64.powf(db / 10.0), 0.0);
            worst = worst.max(relative(ratio(e), ratio(f)));
        }
        for (u, v) in x.values.iter().zip(&y.values) {
            worst = worst.max(relative(u.gated, v.gated));
            worst = worst.max(relative(u.raw, v.raw));
        }
    }
    worst
}

/// Runs `f` on a thread with room for the scan engine (as the commands do).
fn big_stack<T: Send + 'static>(f: impl FnOnce() -> T + Send + 'static) -> T {
    std::thread::Builder::new()
        .stack_size(64 << 20)
        .spawn(f)
        .unwrap()
        .join()
        .unwrap()
}

/// `acquire` against a fresh simulated instrument of `scenario`, with its simulated
/// positioner, into `out`.
fn acquire_scan(
    tag: &str,
    s: &Scenario,
    path: &Path,
    out: &Path,
    choices: Choices,
) -> sweepgate_host::link::acquire::Summary {
    let inst = instrument_support::start(tag, &["--scenario", path.to_str().unwrap()]);
    let profile = Profile::from_toml(SIMULATED_PROFILE).unwrap();
    let req = Request {
        instrument: inst.addr.clone(),
        positioner: AngleSource::Sim(Box::new(s.clone()), s.simulation.seed),
        max_sweeps: None,
        linger_s: 0.0,
        choices,
        out: out.to_path_buf(),
        web: None,
    };
    let sum = big_stack(move || acquire(&profile, req).unwrap());
    drop(inst);
    sum
}

#[test]
fn live_engine_replay_and_process_give_the_same_bins() {
    let dir = instrument_support::temp_dir("one-pipeline");
    let (s, path) = cut("demo-lab", 10.0, &dir);
    let rec = dir.join("scan.rec");
    let live = acquire_scan("one-pipeline", &s, &path, &rec, Choices::default());
    let live_setup = live.setup.clone().expect("the live engine ran");
    assert!(live.bins.len() >= 15, "{} bins", live.bins.len());
    assert_eq!(live.bins.len() as u64, live.bins_closed);

    let recovered = recover_file(&rec).unwrap();
    let r2 = rec.clone();
    let replayed = big_stack(move || {
        replay_records(
            &recovered,
            &replay::Options::fast(&r2),
            &mut Vec::new(),
            None,
            &AtomicBool::new(false),
        )
        .unwrap()
    });
    let opts = process::Options {
        recording: Some(rec.clone()),
        out: Some(dir.join("report")),
        ..process::Options::default()
    };
    let processed = big_stack(move || process::process(&process::resolve(&opts).unwrap()).unwrap());

    // One set-up: the same gate, windows, FFT size, frequencies and bins everywhere.
    let g = &replayed.setup.gate;
    assert_eq!(live_setup.gate, *g);
    assert_eq!(processed.gate, *g);
    assert_eq!(g.band_window, WindowKind::kaiser_for_sidelobe_db(50.0));
    assert_eq!(g.shape, DEFAULT_GATE_SHAPE);
    assert_eq!(live_setup.fft_size, replayed.setup.fft_size);
    assert_eq!(live_setup.frequencies_hz, replayed.setup.frequencies_hz);
    assert_eq!(live_setup.layout, replayed.setup.layout);

    let live_vs_replay = largest_difference("live vs replay", &live.bins, &replayed.report.bins);
    let process_vs_replay = largest_difference(
        "process vs replay",
        &processed.report.bins,
        &replayed.report.bins,
    );
    eprintln!(
        "{} bins at {} frequencies; largest relative difference of raw and gated values and echo levels: \
         live vs replay {live_vs_replay:e}, process vs replay {process_vs_replay:e}",
        live.bins.len(),
        replayed.setup.frequencies_hz.len()
    );
    assert!(live_vs_replay <= TOLERANCE, "{live_vs_replay:e}");
    assert!(process_vs_replay <= TOLERANCE, "{process_vs_replay:e}");

    // The comparison can fail: the live engine's former defaults give other values.
    let former = Choices {
        band_window: Some(WindowKind::Kaiser { beta: 6.0 }),
        gate_shape: Some(WindowKind::Tukey { alpha: 0.5 }),
        ..Choices::default()
    };
    let old = acquire_scan("one-pipeline-old", &s, &path, &dir.join("old.rec"), former);
    let old_vs_replay =
        largest_difference("former live vs replay", &old.bins, &replayed.report.bins);
    eprintln!("with the former live defaults (Kaiser β = 6, Tukey α = 0.5): {old_vs_replay:e}");
    assert!(old_vs_replay > 100.0 * TOLERANCE, "{old_vs_replay:e}");
}

#[test]
fn plan_replay_and_process_report_the_same_gate() {
    let dir = instrument_support::temp_dir("one-pipeline-gate");
    let (mut checked, mut named) = (0, 0);
    for name in [
        "demo-lab",
        "outdoor-ground",
        "workshop-bay",
        "example-annotated",
    ] {
        let (s, path) = cut(name, 4.0, &dir);
        let rec = dir.join(format!("{name}.rec"));
        simulate_to_file(&s, None, s.simulation.seed, &rec, false).unwrap();

        let text = std::fs::read_to_string(&path).unwrap();
        let plan = plan_report(
            &parse_plan_source(&text, name).unwrap(),
            name,
            &Overrides::default(),
        )
        .unwrap();
        // The planner's gate; without one (the first echo cannot be separated), the set-up's
        // documented rule on the plan's own figures: center at the direct path, span four
        // band-window main lobes, at most half the alias-free range.
        let (planned_center_s, planned_span_s) = match &plan.gate {
            Some(g) => (g.center_s, g.span_s),
            None => {
                assert!(
                    plan.findings.iter().any(|f| f.kind == "not_separable"),
                    "{name}: no gate and no reason"
                );
                let t = &plan.time_axis;
                (
                    plan.paths.direct_delay_s,
                    (4.0 * t.mainlobe_s).min(0.5 * t.alias_free_s),
                )
            }
        };

        let recovered = recover_file(&rec).unwrap();
        let r2 = rec.clone();
        let replayed = big_stack(move || {
            replay_records(
                &recovered,
                &replay::Options::fast(&r2),
                &mut Vec::new(),
                None,
                &AtomicBool::new(false),
            )
            .unwrap()
        });
        let out = dir.join(format!("{name}-report"));
        let opts = process::Options {
            recording: Some(rec.clone()),
            out: Some(out.clone()),
            ..process::Options::default()
        };
        big_stack(move || process::process(&process::resolve(&opts).unwrap()).unwrap());
        let summary: serde_json::Value =
            serde_json::from_str(&std::fs::read_to_string(out.join("summary.json")).unwrap())
                .unwrap();

        let replay_gate = &replayed.report.settings["gate"];
        let process_gate = &summary["settings"]["gate"];
        for (what, key, want_s) in [
            ("center", "center_ns", planned_center_s),
            ("span", "span_ns", planned_span_s),
        ] {
            let r = replay_gate[key].as_f64().unwrap();
            let p = process_gate[key].as_f64().unwrap();
            eprintln!(
                "{name}: gate {what} plan {:.6} ns, replay {r:.6} ns, process {p:.6} ns",
                want_s * 1e9
            );
            // 1e-9 ns: the same planner on the same room, printed in ns.
            assert!(
                (r - want_s * 1e9).abs() < 1e-9,
                "{name}: replay {what} {r} ns"
            );
            assert!(
                (p - want_s * 1e9).abs() < 1e-9,
                "{name}: process {what} {p} ns"
            );
        }
        assert_eq!(summary["settings"]["gate_source"], "planner");
        assert_eq!(
            process_gate["band_window"], replay_gate["band_window"],
            "{name}: band window"
        );
        // A scenario naming its band window (example-annotated: `kaiser:6`) is gated with
        // it by every command, as `plan` plans with it.
        let window = match &s.plan.band_window {
            Some(w) => {
                named += 1;
                parse_window(w).unwrap()
            }
            None => default_band_window(),
        };
        assert_eq!(plan.inputs.band_window, format_window(&window), "{name}");
        assert_eq!(
            replay_gate["band_window"],
            describe_window(&window),
            "{name}"
        );
        checked += 1;
    }
    assert_eq!((checked, named), (4, 1));
}

#[test]
fn simulate_writes_truth_at_the_bins_every_command_sets_up() {
    // The simulator's own bin centres (the step angles of a step-and-stop scan, the
    // centres of the bins of a continuous one; `Scenario::bin_centres_deg`) are where the
    // set-up puts the engine's bins and where `simulate` writes its truth.
    let dir = instrument_support::temp_dir("one-pipeline-truth");
    for name in [
        "demo-lab",
        "outdoor-ground",
        "workshop-bay",
        "example-annotated",
    ] {
        for half_deg in [4.0, 180.0] {
            let (s, _) = cut(name, half_deg, &dir);
            let spec = BinSpec::for_scenario(&s, s.bin_width_deg());
            let layout = spec.layout().unwrap();
            let (_, truth_deg) = truth_points(&s).unwrap();
            let mut model = s.bin_centres_deg();
            let mut ours = truth_deg.clone();
            if half_deg == 180.0 && s.positioner.mode == Mode::Step {
                // A full turn of steps ends where it started: the model lists +180° as well.
                model.retain(|a| *a < 180.0 - 1e-9);
            }
            model.sort_by(f64::total_cmp);
            ours.sort_by(f64::total_cmp);
            assert_eq!(ours.len(), model.len(), "{name} ±{half_deg}°");
            assert_eq!(
                usize::from(layout.count()),
                ours.len(),
                "{name} ±{half_deg}°"
            );
            for (i, (a, b)) in ours.iter().zip(&model).enumerate() {
                assert!((a - b).abs() < 1e-9, "{name} ±{half_deg}°: {a} vs {b}");
                let n = f64::from(layout.nominal_deg(i as u16));
                assert!(
                    (n - a).abs() < 1e-4,
                    "{name} ±{half_deg}°: bin {i} at {n}°, truth at {a}°"
                );
            }
        }
    }
}
