//! `acquire --web`: the live engine's bins, impulse responses and status reach the web view
//! as they close, the same bins the acquisition reports. Peers on 127.0.0.1 only.

mod instrument_support;

use std::path::{Path, PathBuf};
use std::time::Duration;

use sweepgate_host::link::acquire::{acquire, AngleSource, Profile, Request, SIMULATED_PROFILE};
use sweepgate_host::model::scenario::Scenario;
use sweepgate_host::pipeline::options::Choices;
use sweepgate_host::web::{Hub, Limits, Meta, WebServer};

fn cut(dir: &Path) -> (Scenario, PathBuf) {
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("scenarios/demo-lab.toml");
    let mut s = Scenario::load(&path).unwrap();
    s.positioner.start_deg = -8.0;
    s.positioner.stop_deg = 8.0;
    s.validate().unwrap();
    let p = dir.join("demo-lab-cut.toml");
    std::fs::write(&p, toml::to_string(&s).unwrap()).unwrap();
    (s, p)
}

#[test]
fn the_live_engine_feeds_the_web_view() {
    let dir = instrument_support::temp_dir("web-acquire");
    let (s, path) = cut(&dir);
    let inst = instrument_support::start("web-acquire", &["--scenario", path.to_str().unwrap()]);
    let limits = Limits {
        write_timeout: Duration::from_secs(5),
        ..Limits::default()
    };
    let server = WebServer::start(
        "127.0.0.1:0".parse().unwrap(),
        Hub::new(Meta::default(), limits),
    )
    .unwrap();
    assert!(server.addr().ip().is_loopback());
    let hub = server.hub().clone();
    let req = Request {
        instrument: inst.addr.clone(),
        positioner: AngleSource::Sim(Box::new(s.clone()), s.simulation.seed),
        max_sweeps: None,
        linger_s: 0.0,
        choices: Choices::default(),
        out: dir.join("scan.rec"),
        web: Some(hub.clone()),
    };
    let profile = Profile::from_toml(SIMULATED_PROFILE).unwrap();
    let sum = std::thread::Builder::new()
        .stack_size(64 << 20)
        .spawn(move || acquire(&profile, req).unwrap())
        .unwrap()
        .join()
        .unwrap();
    drop(inst);
    let v = hub.snapshot();
    let bins = v["bins"].as_array().unwrap();
    println!(
        "acquire closed {} bins; the web view holds {} bins, {} impulse responses; {:?}",
        sum.bins_closed,
        bins.len(),
        v["impulses"].as_array().unwrap().len(),
        hub.counters()
    );
    assert!(sum.bins_closed >= 10, "{}", sum.bins_closed);
    assert_eq!(bins.len() as u64, sum.bins_closed);
    // The same gated values as the acquisition's own bins, through the preview frames.
    for (b, r) in bins.iter().zip(&sum.bins) {
        let g = &b["values"][0]["gated"];
        let (re, im) = (g[0].as_f64().unwrap(), g[1].as_f64().unwrap());
        assert!((re - r.values[0].gated.re).abs() <= 1e-6 * r.values[0].gated.norm().max(1e-12));
        assert!((im - r.values[0].gated.im).abs() <= 1e-6 * r.values[0].gated.norm().max(1e-12));
    }
    // One closed bin in 4 carries its impulse response; the status is the engine's.
    let impulses = v["impulses"].as_array().unwrap().len() as u64;
    assert_eq!(impulses, sum.bins_closed.div_ceil(4));
    assert_eq!(v["status"]["sweeps_pushed"].as_u64().unwrap(), sum.sweeps);
    assert_eq!(v["meta"]["frequencies_hz"].as_array().unwrap().len(), 3);
}
