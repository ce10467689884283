//! RCS captures for the emulated board (see `sweepgate_host::formats::rcs_capture`).
//!
//! ```text
//! cargo run --release -p sweepgate-host --example rcs_capture -- make SCENE_DIR RANGE_JSON CAPTURE
//! cargo run --release -p sweepgate-host --example rcs_capture -- compare CAPTURE ANSWER
//! ```
//!
//! `make` reads a scene written by `host-sim/tests/rcs/rcs_range.py` (target.csv,
//! background.csv, reference.s2p, reference_background.s2p) and its range.json, sets the gate
//! around the target zone as `sweepgate rcs` does, takes four pattern frequencies and the
//! reference sphere's amplitude there (Mie series), and writes the capture. `compare`
//! computes, on the host, each angle's RCS from the capture by the FFT path (rustfft) with the
//! calibration in double precision, and compares the board's answer (kernel path, single
//! precision, the core's `rcs` module): the same angles, factors within 1e-3 relative and
//! RCS within 0.01 dB.

use anyhow::{bail, ensure, Context};
use num_complex::Complex64;
use sweepgate::gate::GateConfig;
use sweepgate::grid::Grid;
use sweepgate::rcs::Zone;
use sweepgate::window::WindowKind;
use sweepgate::Complex32;
use sweepgate_host::formats::rcs_capture::{RcsAnswer, RcsCapture};
use sweepgate_host::model::rcs_targets::ReferenceTarget;
use sweepgate_host::pipeline::engine::gate_sweeps;
use sweepgate_host::pipeline::options::DEFAULT_GATE_SHAPE;
use sweepgate_host::pipeline::rcs::{choose_gate, BackgroundInput, RcsGate, RcsInput, RcsSettings};
use sweepgate_host::pipeline::rcs_input::{self, RcsFiles};

/// The band window of the capture: Kaiser for 50 dB sidelobes, the commands' default.
const BAND_BETA: f32 = 6.851;

fn main() {
    if let Err(e) = run() {
        eprintln!("error: {e:#}");
        std::process::exit(1);
    }
}

fn run() -> anyhow::Result<()> {
    let args: Vec<String> = std::env::args().skip(1).collect();
    match args
        .iter()
        .map(String::as_str)
        .collect::<Vec<_>>()
        .as_slice()
    {
        ["make", scene, range, out] => make(scene.as_ref(), range.as_ref(), out.as_ref()),
        ["compare", cap, answer] => compare(cap.as_ref(), answer.as_ref()),
        _ => bail!("usage: rcs_capture make SCENE_DIR RANGE_JSON CAPTURE | compare CAPTURE ANSWER"),
    }
}

fn make(
    scene: &std::path::Path,
    range: &std::path::Path,
    out: &std::path::Path,
) -> anyhow::Result<()> {
    let text = std::fs::read_to_string(range).with_context(|| format!("{}", range.display()))?;
    let g: serde_json::Value = serde_json::from_str(&text).context("range.json")?;
    let num = |k: &str| {
        g[k].as_f64()
            .with_context(|| format!("range.json: no number {k}"))
    };
    let sphere = ReferenceTarget::Sphere {
        diameter_m: num("reference_diameter_m")?,
    };
    let (t, b) = (scene.join("target.csv"), scene.join("background.csv"));
    let (r, rb) = (
        scene.join("reference.s2p"),
        scene.join("reference_background.s2p"),
    );
    let files = RcsFiles {
        target: &t,
        background: Some(&b),
        reference: &r,
        reference_background: Some(&rb),
    };
    let input = rcs_input::read(&files, sphere)?;
    let gate = zone_gate(&num, &input)?;
    let cap = capture(&input, &gate, sphere)?;
    let bytes = cap.to_bytes()?;
    std::fs::write(out, &bytes).with_context(|| format!("writing {}", out.display()))?;
    println!(
        "rcs capture: {} bytes to {} ({} angles, gate center {:.3} ns, span {:.3} ns)",
        bytes.len(),
        out.display(),
        cap.angles.len(),
        gate.center_s * 1e9,
        gate.span_s * 1e9
    );
    Ok(())
}

/// The gate around the target zone of range.json, as `sweepgate rcs` makes it.
fn zone_gate(
    num: &dyn Fn(&str) -> anyhow::Result<f64>,
    input: &RcsInput,
) -> anyhow::Result<GateConfig> {
    let zone = Zone {
        time_zero_s: num("time_zero_s")?,
        distance_m: num("distance_m")?,
        size_m: num("zone_m")?,
        separation_m: num("separation_m")?,
    };
    let settings = RcsSettings {
        gate: RcsGate::Zone {
            zone,
            echoes_s: vec![num("coupling_s")?, num("mount_s")?],
        },
        band_window: WindowKind::Kaiser { beta: BAND_BETA },
        gate_shape: DEFAULT_GATE_SHAPE,
        frequencies_hz: Vec::new(),
    };
    let gate = choose_gate(&settings, input.grid)?.context("no gate")?;
    Ok(gate)
}

/// The capture of `input` with `gate`, four pattern frequencies and the reference's
/// amplitude there.
fn capture(
    input: &RcsInput,
    gate: &GateConfig,
    sphere: ReferenceTarget,
) -> anyhow::Result<RcsCapture> {
    let WindowKind::Tukey { alpha } = gate.shape else {
        bail!("the capture holds a Tukey gate shape");
    };
    let k = input.grid.points();
    let indices: Vec<u32> = [0.25, 0.4, 0.6, 0.75]
        .iter()
        .map(|x| (x * (k - 1) as f64).round() as u32)
        .collect();
    let known = indices
        .iter()
        .map(|&i| {
            let a = sphere.amplitude(input.grid.frequency_hz(i as usize))?;
            Ok(Complex32::new(a.re as f32, a.im as f32))
        })
        .collect::<anyhow::Result<Vec<_>>>()?;
    let BackgroundInput::PerAngle(bgs) = &input.background else {
        bail!("background.csv is not a manifest");
    };
    let angles = input
        .target
        .iter()
        .zip(bgs)
        .map(|((a, t), (_, b))| (*a as f32, b.clone(), t.clone()))
        .collect();
    let cap = RcsCapture {
        start_hz: input.grid.start_hz(),
        step_hz: input.grid.step_hz(),
        band_beta: BAND_BETA,
        shape_alpha: alpha,
        center_s: gate.center_s,
        span_s: gate.span_s,
        indices,
        known,
        reference: input.reference.clone(),
        reference_background: input.reference_background.clone(),
        angles,
    };
    Ok(cap)
}

/// The host's answer: FFT path (rustfft), calibration in f64.
fn host_answer(cap: &RcsCapture) -> anyhow::Result<(Vec<Complex64>, Vec<Vec<f64>>)> {
    let grid = Grid::new(cap.start_hz, cap.step_hz, cap.points()).context("grid")?;
    let cfg = GateConfig {
        grid,
        band_window: WindowKind::Kaiser {
            beta: cap.band_beta,
        },
        center_s: cap.center_s,
        span_s: cap.span_s,
        shape: WindowKind::Tukey {
            alpha: cap.shape_alpha,
        },
        renormalize: true,
    };
    let minus = |a: &[Complex32], b: &[Complex32]| -> Vec<Complex32> {
        a.iter().zip(b).map(|(x, y)| x - y).collect()
    };
    let mut sweeps = vec![minus(&cap.reference, &cap.reference_background)];
    sweeps.extend(cap.angles.iter().map(|(_, b, t)| minus(t, b)));
    let refs: Vec<&[Complex32]> = sweeps.iter().map(|s| s.as_slice()).collect();
    let gated = gate_sweeps(&cfg, &refs, None)?.spectra;
    let c = |v: Complex32| Complex64::new(v.re as f64, v.im as f64);
    let factors: Vec<Complex64> = cap
        .indices
        .iter()
        .zip(&cap.known)
        .map(|(&i, &k)| c(k) / c(gated[0][i as usize]))
        .collect();
    let rows = gated[1..]
        .iter()
        .map(|g| {
            cap.indices
                .iter()
                .zip(&factors)
                .map(|(&i, f)| 10.0 * (c(g[i as usize]) * f).norm_sqr().log10())
                .collect()
        })
        .collect();
    Ok((factors, rows))
}

fn compare(cap: &std::path::Path, answer: &std::path::Path) -> anyhow::Result<()> {
    let bytes = std::fs::read(cap).with_context(|| format!("reading {}", cap.display()))?;
    let cap = RcsCapture::from_bytes(&bytes).context("the capture")?;
    let bytes = std::fs::read(answer).with_context(|| format!("reading {}", answer.display()))?;
    let board = RcsAnswer::from_bytes(&bytes, cap.indices.len()).context("the board's answer")?;
    let (factors, rows) = host_answer(&cap)?;
    ensure!(
        board.rows.len() == rows.len(),
        "board gave {} angles, host {}",
        board.rows.len(),
        rows.len()
    );
    for (b, h) in board.factors.iter().zip(&factors) {
        let b = Complex64::new(b.re as f64, b.im as f64);
        ensure!(
            (b - h).norm() <= 1e-3 * h.norm(),
            "calibration factor: board {b}, host {h}"
        );
    }
    let mut worst = 0.0f64;
    for ((a, b), ((ca, _, _), h)) in board.rows.iter().zip(cap.angles.iter().zip(&rows)) {
        ensure!(a == ca, "board's angle {a} is not the capture's {ca}");
        for (x, y) in b.iter().zip(h) {
            worst = worst.max((*x as f64 - y).abs());
        }
    }
    println!(
        "rcs compare: {} angles × {} frequencies, board (kernel path, f32) against host (FFT path, f64 calibration): worst {:.2e} dB",
        rows.len(),
        cap.indices.len(),
        worst
    );
    ensure!(worst <= 0.01, "board and host differ by {worst} dB");
    Ok(())
}
