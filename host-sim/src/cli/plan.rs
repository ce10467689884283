//! `sweepgate plan --scenario FILE [--json] [--aut-size-m D] [--fractional-bandwidth B]
//! [--band-window W] [--rotation-deg-s S]`: plans a gated measurement from a scenario or a
//! plan file ([`crate::pipeline::plan`]) and prints the table
//! ([`crate::output::plan_text::render_text`]) or the report as JSON.

use std::path::PathBuf;

use sweepgate::window::WindowKind;

use crate::output::plan_text::render_text;
use crate::pipeline::options::parse_window;
use crate::pipeline::plan::{load_plan_source, plan_report, Overrides};

/// Options of `sweepgate plan`.
#[derive(clap::Args, Debug)]
pub struct Args {
    /// Scenario file or plan file (TOML).
    #[arg(long)]
    pub scenario: PathBuf,
    /// Print JSON instead of the table.
    #[arg(long)]
    pub json: bool,
    /// The AUT's largest dimension, m (overrides the file).
    #[arg(long)]
    pub aut_size_m: Option<f64>,
    /// The AUT's own fractional bandwidth, bandwidth / centre frequency (overrides the file).
    #[arg(long)]
    pub fractional_bandwidth: Option<f64>,
    /// Band window: kaiser:BETA, tukey:ALPHA, hann, hamming, blackman-harris, rectangular.
    #[arg(long, value_parser = parse_window)]
    pub band_window: Option<WindowKind>,
    /// Planned rotation speed, degrees per second (overrides the positioner's).
    #[arg(long)]
    pub rotation_deg_s: Option<f64>,
}

/// Runs the command.
pub fn run(args: Args) -> anyhow::Result<()> {
    let origin = args.scenario.display().to_string();
    let source = load_plan_source(&args.scenario)?;
    let overrides = Overrides {
        aut_size_m: args.aut_size_m,
        fractional_bandwidth: args.fractional_bandwidth,
        band_window: args.band_window,
        rotation_deg_s: args.rotation_deg_s,
    };
    let report = plan_report(&source, &origin, &overrides)?;
    if args.json {
        println!("{}", serde_json::to_string_pretty(&report)?);
    } else {
        print!("{}", render_text(&report));
    }
    Ok(())
}
