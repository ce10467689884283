//! The gate chosen from the data ([`sweepgate::autogate`]) for saved sweeps: every sweep's
//! band-windowed impulse response is looked at and summarised in [`REGIONS`] angle regions,
//! and the survey chooses the gate. What it found (direct-path delays, the earliest echo,
//! the margin, whether any gate can work) goes to `summary.json` (`settings.data_gate`)
//! and to the terminal; a planner's gate is compared with it.

use anyhow::Context;
use serde_json::json;
use sweepgate::autogate::{self, Choice, Survey, SurveyConfig, Unseparable};
use sweepgate::fft::Fft;
use sweepgate::gate::Gate;
use sweepgate::grid::Grid;
use sweepgate::window::WindowKind;
use sweepgate::Complex32;

use crate::pipeline::transform::{self, FftJob};

/// Angle regions of the survey: 30° each.
pub const REGIONS: usize = 12;

/// Most sweeps looked at; a longer scan is looked at every n-th sweep.
pub const MAX_LOOKS: usize = 720;

/// The sweeps of `n` the survey looks at: at most [`MAX_LOOKS`], every n-th (from the
/// first) of a longer scan. A caller holding only these may pass the others empty.
pub fn looked(n: usize) -> impl Iterator<Item = usize> {
    (0..n).step_by(n.max(1).div_ceil(MAX_LOOKS))
}

/// Its name in `gate_source`.
pub const SOURCE: &str = "chosen from the data";

/// The gate from the data and what the survey found.
#[derive(Debug, Clone)]
pub struct DataGate {
    /// How the gate was chosen, in words (also the terminal's line).
    pub rule: String,
    /// The survey's choice.
    pub choice: Choice,
    /// The regions' summaries.
    pub survey: Survey<REGIONS>,
    /// Sweeps looked at (with a direct path).
    pub sweeps: usize,
    /// Whether the regions are angles (else sweep order spread over a turn).
    pub by_angle: bool,
}

/// Chooses the gate from `sweeps` (those of the grid's length), their angles when known;
/// the sweeps are looked at on every core ([`data_gate_on`]).
pub fn data_gate(
    grid: &Grid,
    band_window: WindowKind,
    sweeps: &[&[Complex32]],
    angles_deg: Option<&[f64]>,
) -> anyhow::Result<DataGate> {
    data_gate_on(
        grid,
        band_window,
        sweeps,
        angles_deg,
        crate::threads::available(),
    )
}

/// [`data_gate`] with the sweeps looked at on up to `threads` threads; the survey takes
/// the looks in sweep order, so the result is the same bit for bit for any `threads`.
pub fn data_gate_on(
    grid: &Grid,
    band_window: WindowKind,
    sweeps: &[&[Complex32]],
    angles_deg: Option<&[f64]>,
    threads: usize,
) -> anyhow::Result<DataGate> {
    let size = transform::fft_size(grid.points())?;
    let survey = transform::run(
        size,
        Surveying {
            grid,
            band_window,
            sweeps,
            angles_deg,
            threads,
        },
    )?;
    let choice = survey
        .choose(grid, band_window, size.points())
        .context("choosing the gate from the data")?;
    let sweeps = survey.regions().iter().map(|r| usize::from(r.looks)).sum();
    let by_angle = angles_deg.is_some();
    Ok(DataGate {
        rule: rule(&choice, by_angle, survey.config().weak_direct_db),
        choice,
        survey,
        sweeps,
        by_angle,
    })
}

/// Every sweep's impulse response looked at and added to the survey.
struct Surveying<'a> {
    grid: &'a Grid,
    band_window: WindowKind,
    sweeps: &'a [&'a [Complex32]],
    angles_deg: Option<&'a [f64]>,
    threads: usize,
}

/// Sweeps a thread takes at a time in the survey's passes (each costs an FFT, and a look a
/// template fit over the direct main lobe).
const SURVEY_BLOCK: usize = 16;

impl FftJob for Surveying<'_> {
    type Output = anyhow::Result<Survey<REGIONS>>;
    fn run<const M: usize>(self) -> Self::Output
    where
        [Complex32; M]: Fft,
    {
        let gate = transform::provisional_gate::<M>(self.grid, self.band_window)?;
        let cfg = SurveyConfig::DEFAULT;
        let sidelobe_db = autogate::peak_sidelobe_db(self.band_window);
        let mut survey = Survey::<REGIONS>::new(cfg).context("the survey")?;
        let n = self.sweeps.len().max(1);
        // At most MAX_LOOKS sweeps, evenly spread ([`looked`]): each look fits a template
        // over the direct main lobe (a few hundred K-point sums).
        let usable: Vec<(usize, &[Complex32])> = looked(self.sweeps.len())
            .filter_map(|i| self.sweeps.get(i).map(|s| (i, *s)))
            .filter(|(_, s)| s.len() == self.grid.points())
            .collect();
        // First pass: the strongest arrival of all, the direct path at the main beam (the
        // first of equals, as one thread taking the sweeps in order finds it).
        let mut reference = (0.0f32, f32::NEG_INFINITY);
        let strongest = each_impulse(&gate, &usable, self.threads, |h| {
            autogate::strongest_arrival(&gate, h)
        });
        for a in strongest.into_iter().flatten() {
            if a.1 > reference.1 {
                reference = a;
            }
        }
        survey.set_reference_db(reference.1);
        let looks = each_impulse(&gate, &usable, self.threads, |h| {
            autogate::look(&gate, h, sidelobe_db, &cfg, reference)
        });
        for ((i, _), look) in usable.iter().zip(looks) {
            let angle = match self.angles_deg.and_then(|a| a.get(*i)) {
                Some(a) => *a,
                None => 360.0 * *i as f64 / n as f64,
            };
            if let Some(l) = look {
                survey.add(angle as f32, &l);
            }
        }
        Ok(survey)
    }
}

/// `what` of each sweep's band-windowed impulse response, in the sweeps' order, on up to
/// `threads` threads (each with its own buffers; the gate is shared).
fn each_impulse<const M: usize, R: Send>(
    gate: &Gate<M>,
    sweeps: &[(usize, &[Complex32])],
    threads: usize,
    what: impl Fn(&[Complex32; M]) -> R + Sync,
) -> Vec<R>
where
    [Complex32; M]: Fft,
{
    let buffers = || {
        (
            Box::new([Complex32::new(0.0, 0.0); M]),
            Box::new([Complex32::new(0.0, 0.0); M]),
        )
    };
    crate::threads::map_blocks(sweeps, threads, SURVEY_BLOCK, buffers, |(raw, h), b| {
        b.iter()
            .map(|(_, s)| {
                impulse(gate, s, raw, h);
                what(h)
            })
            .collect()
    })
}

/// The band-windowed impulse response of `s` (of the grid's length) into `h`.
fn impulse<const M: usize>(
    gate: &Gate<M>,
    s: &[Complex32],
    raw: &mut [Complex32; M],
    h: &mut [Complex32; M],
) where
    [Complex32; M]: Fft,
{
    raw.fill(Complex32::new(0.0, 0.0));
    let n = s.len().min(M);
    raw[..n].copy_from_slice(&s[..n]);
    gate.impulse_response(raw, h);
}

fn ns(s: f64) -> f64 {
    s * 1e9
}

/// The rule in words (also the terminal's line).
fn rule(c: &Choice, by_angle: bool, weak_direct_db: f32) -> String {
    let mut t = format!(
        "chosen from the data: center {:.3} ns, span {:.3} ns; direct path {:.3} to {:.3} ns where within {:.0} dB of its strongest (main lobe ±{:.3} ns)",
        ns(c.center_s),
        ns(c.span_s),
        ns(c.direct_lo_s),
        ns(c.direct_hi_s),
        -weak_direct_db,
        ns(c.half_lobe_s)
    );
    match (c.echo, c.margin_s) {
        (Some(e), Some(m)) => t.push_str(&format!(
            "; nearest echo that matters at {:.3} ns ({:+.3} ns from the direct path, {:.1} dB relative to it, at {} {:.0}°); margin {:.3} ns",
            ns(f64::from(e.delay_s)),
            ns(f64::from(e.excess_s)),
            e.relative_db,
            if by_angle { "angle" } else { "sweep-order angle" },
            e.angle_deg,
            ns(m)
        )),
        _ => t.push_str("; no echo that matters"),
    }
    t
}

/// The warning when no gate can separate the direct path from an echo.
pub fn unseparable_warning(c: &Choice, grid: &Grid) -> Option<String> {
    let b = grid.step_hz() * (grid.points().saturating_sub(1)) as f64;
    Some(match c.unseparable? {
        Unseparable::TooClose {
            needed_bandwidth_hz,
        } => format!(
            "unseparable: the nearest echo ({:.3} ns) is closer to the direct path than the band resolves; a bandwidth of about {:.3} GHz would be needed (this sweep has {:.3} GHz); the least-bad gate closes halfway to the echo",
            c.echo.map_or(f64::NAN, |e| ns(f64::from(e.delay_s))),
            needed_bandwidth_hz / 1e9,
            b / 1e9
        ),
        Unseparable::Merged {
            residual_db,
            angle_deg,
            needed_bandwidth_hz,
        } => format!(
            "unseparable: an echo lies inside the direct path's main lobe (a fit of the direct path alone leaves {residual_db:.1} dB of its main lobe, at {angle_deg:.0}°); no gate can remove it; a bandwidth of roughly {:.3} GHz or more would be needed (from where the fit residual peaks; this sweep has {:.3} GHz); the least-bad gate keeps only the direct main lobe",
            needed_bandwidth_hz / 1e9,
            b / 1e9
        ),
    })
}

impl DataGate {
    /// `settings.data_gate` of `summary.json`.
    pub fn to_json(&self, grid: &Grid) -> serde_json::Value {
        let c = &self.choice;
        let echo = c.echo.map(|e| {
            json!({
                "delay_ns": ns(f64::from(e.delay_s)),
                "from_direct_ns": ns(f64::from(e.excess_s)),
                "relative_db": e.relative_db,
                "angle_deg": e.angle_deg,
            })
        });
        let unseparable = c.unseparable.map(|u| match u {
            Unseparable::TooClose {
                needed_bandwidth_hz,
            } => json!({"reason": "echo too close", "needed_bandwidth_hz": needed_bandwidth_hz}),
            Unseparable::Merged {
                residual_db,
                angle_deg,
                needed_bandwidth_hz,
            } => json!({
                "reason": "echo inside the direct main lobe",
                "fit_residual_db": residual_db,
                "angle_deg": angle_deg,
                "needed_bandwidth_hz": needed_bandwidth_hz,
            }),
        });
        let width = 360.0 / REGIONS as f64;
        let regions: Vec<serde_json::Value> = self
            .survey
            .regions()
            .iter()
            .enumerate()
            .filter(|(_, r)| r.looks > 0)
            .map(|(i, r)| {
                json!({
                    "from_deg": i as f64 * width,
                    "to_deg": (i + 1) as f64 * width,
                    "sweeps": r.looks,
                    "direct_db": r.direct_db,
                    "direct_ns": [ns(f64::from(r.direct_lo_s)), ns(f64::from(r.direct_hi_s))],
                    "nearest_echo_after_ns": r.after.map(|e| ns(f64::from(e.excess_s))),
                    "nearest_echo_after_relative_db": r.after.map(|e| e.relative_db),
                    "nearest_echo_before_ns": r.before.map(|e| ns(f64::from(e.excess_s))),
                    "nearest_echo_before_relative_db": r.before.map(|e| e.relative_db),
                    "worst_fit_residual_db": r.residual.0,
                })
            })
            .collect();
        json!({
            "center_ns": ns(c.center_s),
            "span_ns": ns(c.span_s),
            "direct_path_ns": [ns(c.direct_lo_s), ns(c.direct_hi_s)],
            "half_main_lobe_ns": ns(c.half_lobe_s),
            "nearest_echo": echo,
            "margin_ns": c.margin_s.map(ns),
            "unseparable": unseparable,
            "warning": unseparable_warning(c, grid),
            "sweeps": self.sweeps,
            "regions_by": if self.by_angle { "angle" } else { "sweep order" },
            "regions": regions,
        })
    }

    /// Whether another gate (`source`'s: center and span, s) disagrees with this one: its
    /// center is more than half a main lobe away, it does not hold the direct main lobe, or
    /// it runs into the limiting echo's main lobe. The disagreement in words.
    pub fn disagreement(&self, source: &str, center_s: f64, span_s: f64) -> Option<String> {
        let c = &self.choice;
        let l = c.half_lobe_s;
        // A twentieth of the main lobe: rounding of the two ways of working it out.
        let tol = 0.05 * l;
        let (start, end) = (center_s - 0.5 * span_s, center_s + 0.5 * span_s);
        let mut why = Vec::new();
        if (center_s - c.center_s).abs() > l + tol {
            why.push(format!(
                "its center is {:.3} ns from the data's",
                ns(center_s - c.center_s)
            ));
        }
        if start > c.direct_lo_s - l + tol || end < c.direct_hi_s + l - tol {
            why.push("it does not hold the whole direct main lobe seen in the data".into());
        }
        if let Some(e) = c.echo {
            if end > f64::from(e.delay_s) - l + tol {
                why.push(format!(
                    "it runs into the echo the data show at {:.3} ns",
                    ns(f64::from(e.delay_s))
                ));
            }
        }
        (!why.is_empty()).then(|| {
            format!(
                "the {} gate (center {:.3} ns, span {:.3} ns) and the gate from the data (center {:.3} ns, span {:.3} ns) disagree: {}",
                source,
                ns(center_s),
                ns(span_s),
                ns(c.center_s),
                ns(c.span_s),
                why.join("; ")
            )
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A turn of sweeps: a direct path at 10 ns whose level follows the angle, and an echo
    /// at 14 ns, 10 dB down, that comes and goes. Each path is e^(−j2πfτ) (the Fourier shift
    /// theorem), written here, not the product's simulator.
    fn scan(grid: &Grid, sweeps: usize) -> Vec<Vec<Complex32>> {
        let path = |f: f64, delay_s: f64, a: f64| {
            let ph = -2.0 * std::f64::consts::PI * f * delay_s;
            Complex32::new((a * ph.cos()) as f32, (a * ph.sin()) as f32)
        };
        (0..sweeps)
            .map(|i| {
                let theta = 2.0 * std::f64::consts::PI * i as f64 / sweeps as f64;
                let direct = 0.2 + 0.8 * (0.5 + 0.5 * theta.cos());
                let echo = 0.316 * (0.5 + 0.5 * (3.0 * theta).sin());
                (0..grid.points())
                    .map(|n| {
                        let f = grid.frequency_hz(n);
                        path(f, 10e-9, direct) + path(f, 14e-9, echo)
                    })
                    .collect()
            })
            .collect()
    }

    #[test]
    fn any_number_of_threads_gives_the_same_survey_and_gate() {
        let grid = Grid::from_start_stop(8e9, 12e9, 201).unwrap();
        let sweeps = scan(&grid, 150);
        let refs: Vec<&[Complex32]> = sweeps.iter().map(|s| &s[..]).collect();
        let angles: Vec<f64> = (0..150).map(|i| i as f64 * 2.4).collect();
        let bw = WindowKind::Kaiser { beta: 6.0 };
        let one = data_gate_on(&grid, bw, &refs, Some(&angles), 1).unwrap();
        // The gate lies between the direct path and the echo (its sense, not only its
        // sameness, is checked).
        assert!(
            one.choice.center_s > 9e-9 && one.choice.center_s < 14e-9,
            "{one:?}"
        );
        assert_eq!(one.sweeps, 150);
        for threads in [2, 3, 8] {
            let many = data_gate_on(&grid, bw, &refs, Some(&angles), threads).unwrap();
            assert_eq!(many.choice, one.choice, "{threads} threads");
            assert_eq!(many.survey, one.survey, "{threads} threads");
            assert_eq!(many.rule, one.rule);
        }
    }
}
