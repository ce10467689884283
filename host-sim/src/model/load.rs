//! Reading a scenario and checking it as a whole: [`Scenario::from_toml`],
//! [`Scenario::load`], [`Scenario::validate`] (every field, then the scan's length from its
//! schedule), [`Scenario::warnings`] (echoes beyond the alias-free range, a far field beyond
//! the range) and [`Scenario::expected_sweeps`].
//!
//! These are methods of [`Scenario`] defined here rather than in
//! [`crate::model::scenario`], because they need the [`Timeline`] and the room's paths,
//! which are built from the scenario: the description stays a leaf that imports nothing
//! back.

use std::path::Path;

use anyhow::Context;
use sweepgate::plan::SPEED_OF_LIGHT_M_S;

use crate::limits::{MAX_BINS, MAX_POSITION_SAMPLES, MAX_SCAN_S};
use crate::model::geometry;
use crate::model::scenario::{bad, toml_one_line, Scenario, ScenarioError, MAX_SWEEPS};
use crate::model::timeline::Timeline;

impl Scenario {
    /// Parses TOML text and validates it. Errors are one line (`line L, column C: …` for
    /// TOML syntax and field types).
    pub fn from_toml(text: &str) -> anyhow::Result<Self> {
        // The toml crate's own message spans several lines with a snippet; the one-line
        // form keeps its message and position.
        let s: Scenario =
            toml::from_str(text).map_err(|e| anyhow::anyhow!("{}", toml_one_line(text, &e)))?;
        s.validate()?;
        Ok(s)
    }

    /// Reads and validates a scenario file.
    pub fn load(path: &Path) -> anyhow::Result<Self> {
        let text = std::fs::read_to_string(path)
            .with_context(|| format!("reading scenario {}", path.display()))?;
        Self::from_toml(&text).with_context(|| format!("in scenario {}", path.display()))
    }

    /// Checks every field ([`Scenario::check_fields`]), then that the scan takes at least
    /// one and at most [`MAX_SWEEPS`] sweeps, at most [`MAX_SCAN_S`] and at most
    /// [`MAX_POSITION_SAMPLES`] positioner samples; the error names the first bad field.
    pub fn validate(&self) -> Result<(), ScenarioError> {
        self.check_fields()?;
        let timeline = Timeline::new(self);
        let n = timeline.sweep_starts_s().len();
        if n > MAX_SWEEPS {
            return Err(bad(
                "positioner",
                format!("the scan would take {n} sweeps (limit {MAX_SWEEPS})"),
            ));
        }
        if n == 0 {
            return Err(bad(
                "positioner",
                "the scan is shorter than one sweep: no sweep would be taken",
            ));
        }
        let end_s = timeline.end_s();
        if end_s.is_nan() || end_s > MAX_SCAN_S {
            return Err(bad(
                "positioner",
                format!("the scan would last {end_s:.0} s (limit {MAX_SCAN_S:.0} s, a day)"),
            ));
        }
        let interval_s = self.positioner.sample_interval_s;
        let samples = end_s / interval_s;
        if samples > MAX_POSITION_SAMPLES as f64 {
            return Err(bad(
                "positioner.sample_interval_s",
                format!(
                    "{interval_s} s over a {end_s:.0} s scan gives {samples:.0} positioner \
                     samples (limit {MAX_POSITION_SAMPLES})"
                ),
            ));
        }
        self.check_bin_count()
    }

    /// The scan's angle bins (span / bin width) fit the engine's [`MAX_BINS`].
    fn check_bin_count(&self) -> Result<(), ScenarioError> {
        let q = &self.positioner;
        let span = (q.stop_deg - q.start_deg).abs().min(360.0);
        let width = self.bin_width_deg();
        let bins = span / width;
        if bins > MAX_BINS as f64 + 1e-6 {
            return Err(bad(
                "pattern.bin_width_deg",
                format!(
                    "{width} deg over a {span} deg scan gives {bins:.0} bins (limit {MAX_BINS}: \
                     at least {} deg)",
                    span / MAX_BINS as f64
                ),
            ));
        }
        Ok(())
    }

    /// Number of sweeps the scan will take (from its [`Timeline`]).
    pub fn expected_sweeps(&self) -> usize {
        Timeline::new(self).sweep_starts_s().len()
    }

    /// Things that are legal but probably not what was meant (echoes beyond the
    /// alias-free range, a far field farther than the range).
    pub fn warnings(&self) -> Vec<String> {
        let mut w = Vec::new();
        let Ok(grid) = self.grid() else {
            return w;
        };
        let direct = self.range_length_m();
        let longest = geometry::paths(self)
            .iter()
            .map(|p| p.length_m)
            .fold(direct, f64::max);
        let excess_s = (longest - direct) / SPEED_OF_LIGHT_M_S;
        if excess_s >= grid.alias_free_s() {
            w.push(format!(
                "the longest echo arrives {:.1} ns after the direct path, beyond the alias-free range {:.1} ns (1/Δf): it will wrap",
                excess_s * 1e9,
                grid.alias_free_s() * 1e9
            ));
        }
        if let Some(d) = self.aut.largest_size_m() {
            let lambda = SPEED_OF_LIGHT_M_S / self.sweep.stop_hz;
            let ff = 2.0 * d * d / lambda;
            if ff > direct {
                w.push(format!(
                    "the far field of the AUT at the top frequency starts at {ff:.2} m (2D²/λ), beyond the range length {direct:.2} m"
                ));
            }
        }
        w
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::scenario::{Antenna, Taper};

    const SMALL: &str = r#"
name = "t"
[sweep]
start_hz = 8e9
stop_hz = 12e9
points = 201
sweep_duration_s = 0.02
[range]
distance_m = 4.0
aut_height_m = 1.5
probe_height_m = 1.5
[[planes]]
axis = "z"
position_m = 0.0
reflection = -0.3
[aut]
kind = "aperture"
width_m = 0.1
height_m = 0.08
width_taper = "cosine"
[positioner]
mode = "continuous"
start_deg = -10
stop_deg = 10
speed_deg_s = 20
acceleration_deg_s2 = 40
counts_per_turn = 36000
sample_interval_s = 0.01
"#;

    #[test]
    fn parses_a_small_scenario() {
        let s = Scenario::from_toml(SMALL).unwrap();
        assert_eq!(s.sweep.points, 201);
        assert_eq!(s.probe, Antenna::Isotropic);
        assert!(matches!(
            s.aut,
            Antenna::Aperture {
                width_taper: Taper::Cosine,
                ..
            }
        ));
        assert!(s.expected_sweeps() > 10);
    }

    #[test]
    fn errors_name_the_field() {
        let e = Scenario::from_toml(&SMALL.replace("stop_hz = 12e9", "stop_hz = 7e9"))
            .unwrap_err()
            .to_string();
        assert!(e.contains("sweep.stop_hz"), "{e}");
        let e = Scenario::from_toml(&SMALL.replace("reflection = -0.3", "reflection = -1.3"))
            .unwrap_err()
            .to_string();
        assert!(e.contains("planes[0].reflection"), "{e}");
        let e = Scenario::from_toml(&SMALL.replace("position_m = 0.0", "position_m = 1.5"))
            .unwrap_err()
            .to_string();
        assert!(e.contains("planes[0].position_m"), "{e}");
        let e = Scenario::from_toml(&SMALL.replace("width_m = 0.1", "width_m = -0.1"))
            .unwrap_err()
            .to_string();
        assert!(e.contains("aut.width_m"), "{e}");
        let e = Scenario::from_toml(&SMALL.replace("mode = \"continuous\"", "mode = \"step\""))
            .unwrap_err()
            .to_string();
        assert!(e.contains("positioner.step_deg"), "{e}");
        // Unknown fields are refused, and serde names them.
        let e = format!(
            "{:#}",
            Scenario::from_toml(&SMALL.replace("points = 201", "points = 201\npoint = 3"))
                .unwrap_err()
        );
        assert!(e.contains("point"), "{e}");
    }

    #[test]
    fn warns_about_echoes_beyond_the_alias_free_range() {
        let s = Scenario::from_toml(SMALL).unwrap();
        assert!(s.warnings().is_empty(), "{:?}", s.warnings());
        // 21 points over 4 GHz: 200 MHz steps, alias-free 5 ns (1.5 m); a wall 3 m behind
        // the probe adds 6 m.
        let text = SMALL.replace("points = 201", "points = 21")
            + "[[planes]]\naxis = \"x\"\nposition_m = 7.0\nreflection = -0.5\n";
        let s = Scenario::from_toml(&text).unwrap();
        let w = s.warnings();
        assert!(w.iter().any(|x| x.contains("alias-free")), "{w:?}");
    }
}
