//! `sweepgate instrument` over TCP: each command, the data formats, the error queue.
//! Command words and error numbers: IEEE 488.2 common commands and SCPI-1999 Volume 2
//! (standard subsystems, error list), from memory.

mod instrument_support;

use instrument_support::{dumped, start, Client};
use sweepgate::wire::ascii::{AsciiConfig, AsciiDecoder};
use sweepgate::wire::block::{BlockConfig, BlockDecoder, ByteOrder, DecodeEvent, Format};
use sweepgate::Complex32;

fn decode(bytes: &[u8], points: usize, f: Format, o: ByteOrder) -> Vec<Complex32> {
    let mut d = BlockDecoder::new(BlockConfig::new(points, f, o).unwrap());
    let mut buf = vec![Complex32::new(0.0, 0.0); points];
    let fed = d.feed(bytes, &mut buf);
    assert_eq!(fed.event, Some(DecodeEvent::Sweep { points }));
    // emit's trailing newline is left for the next feed (it belongs to the block).
    assert!(bytes.len() - fed.consumed <= 1);
    buf
}

fn assert_same(got: &[Complex32], re: &[f32], im: &[f32]) {
    assert_eq!(got.len(), re.len());
    for (k, c) in got.iter().enumerate() {
        assert_eq!((c.re, c.im), (re[k], im[k]), "point {k}");
    }
}

#[test]
fn idn_and_the_ieee_488_2_common_commands() {
    let inst = start("common", &[]);
    let mut c = Client::connect(&inst.addr);
    let idn = c.query("*IDN?");
    assert_eq!(
        idn,
        format!("sweepgate,simulated-vna,0,{}", env!("CARGO_PKG_VERSION"))
    );
    assert_eq!(
        idn.split(',').count(),
        4,
        "IEEE 488.2 *IDN? has four fields"
    );
    assert_eq!(c.query("*idn?"), idn, "case-insensitive");
    assert_eq!(c.query("*OPC?"), "1");
    assert_eq!(c.query("*TST?"), "0");
    assert_eq!(c.query("*ESR?"), "0");
    c.send("*OPC");
    assert_eq!(c.query("*ESR?"), "1", "OPC is bit 0");
    assert_eq!(c.query("*ESR?"), "0", "*ESR? clears the register");
    c.send("*ESE 36");
    assert_eq!(c.query("*ESE?"), "36");
    c.send("*SRE 16");
    assert_eq!(c.query("*SRE?"), "16");
    c.send("*WAI");
    assert_eq!(c.query("SYSTem:VERSion?"), "1999.0");
    assert!(c.errors().is_empty());
}

#[test]
fn settings_in_short_and_long_form_any_case() {
    let inst = start("settings", &[]);
    let mut c = Client::connect(&inst.addr);
    // *RST defaults: ASCii, NORMal, the scenario's grid (demo lab: 8 to 12 GHz, 201).
    assert_eq!(c.query("FORMat:DATA?"), "ASC,0");
    assert_eq!(c.query("FORMat:BORDer?"), "NORM");
    assert_eq!(
        c.query("SENSe:FREQuency:STARt?").parse::<f64>().unwrap(),
        8e9
    );
    assert_eq!(c.query("SENS:FREQ:STOP?").parse::<f64>().unwrap(), 12e9);
    assert_eq!(c.query("SWE:POIN?"), "201");

    c.send("form real,64");
    assert_eq!(c.query("FORM?"), "REAL,64");
    c.send("FORMAT:DATA REAL,32");
    assert_eq!(c.query("format:data?"), "REAL,32");
    c.send("FORM ASCii,6");
    assert_eq!(c.query("FORM?"), "ASC,6");
    c.send("FORMat:BORDer SWAPped");
    assert_eq!(c.query("FORM:BORD?"), "SWAP");
    c.send("form:bord norm");
    assert_eq!(c.query("FORM:BORD?"), "NORM");

    c.send(":SENSe:FREQuency:STARt 9 GHZ");
    c.send("FREQ:STOP 11000MHZ");
    c.send("sense:sweep:points 51");
    assert_eq!(c.query("FREQ:STAR?").parse::<f64>().unwrap(), 9e9);
    assert_eq!(c.query("FREQuency:STOP?").parse::<f64>().unwrap(), 11e9);
    assert_eq!(c.query("SENSe:SWEep:POINts?"), "51");
    // Several queries in one message: answers joined by ';'.
    assert_eq!(c.query("SWE:POIN?;FORM:BORD?;*OPC?"), "51;NORM;1");
    assert!(c.errors().is_empty());

    c.send("*RST");
    assert_eq!(
        c.query("SWE:POIN?"),
        "201",
        "*RST restores the scenario grid"
    );
    assert_eq!(c.query("FORM?"), "ASC,0");
}

#[test]
fn sweep_data_in_every_format_matches_what_the_simulator_wrote() {
    let inst = start("formats", &[]);
    let mut c = Client::connect(&inst.addr);
    c.send("SENS:SWE:POIN 101");
    c.send("INITiate:IMMediate");
    assert_eq!(c.query("*OPC?"), "1");
    let (index, re, im) = dumped(&inst.dump, 0);
    assert_eq!(index, 0);
    assert_eq!(re.len(), 101);
    // Not a flat or empty sweep.
    assert!(re.iter().zip(&im).any(|(a, b)| a.hypot(*b) > 1e-4));

    for (form, f) in [("REAL,32", Format::Real32), ("REAL,64", Format::Real64)] {
        for (bord, o) in [
            ("NORMal", ByteOrder::Normal),
            ("SWAPped", ByteOrder::Swapped),
        ] {
            c.send(&format!("FORM {form};FORM:BORD {bord}"));
            c.send("TRACe:DATA?");
            let bytes = c.block();
            // IEEE 488.2 §8.7.9: #, digit count, byte count, bytes.
            let len = 101 * 2 * f.value_bytes();
            let head = format!("#{}{len}", len.to_string().len());
            assert_eq!(&bytes[..head.len()], head.as_bytes());
            let got = decode(&bytes, 101, f, o);
            assert_same(&got, &re, &im);
        }
    }
    // The first value by hand: REAL,32 NORMal is big-endian IEEE 754.
    c.send("FORM REAL,32;FORM:BORD NORM");
    c.send("TRAC?");
    let b = c.block();
    assert_eq!(&b[..5], b"#3808");
    let first = f32::from_be_bytes([b[5], b[6], b[7], b[8]]);
    assert_eq!(first, re[0]);

    // ASCii with shortest exact digits round-trips every value.
    c.send("FORM ASC");
    c.send("CALCulate:DATA?");
    let line = c.line();
    let mut d = AsciiDecoder::new(AsciiConfig::new(101).unwrap());
    let mut buf = vec![Complex32::new(0.0, 0.0); 101];
    let fed = d.feed(format!("{line}\n").as_bytes(), &mut buf);
    assert_eq!(fed.event, Some(DecodeEvent::Sweep { points: 101 }));
    assert_same(&buf, &re, &im);
    // ASCii,4: four significant digits.
    c.send("FORM ASC,4;TRAC:DATA?");
    let line = c.line();
    let first: &str = line.split(',').next().unwrap();
    let mantissa = first.trim_start_matches('-').split('E').next().unwrap();
    assert_eq!(mantissa.replace('.', "").len(), 4, "{first}");
    let v: f32 = first.parse().unwrap();
    assert!((v - re[0]).abs() <= re[0].abs() * 1e-3, "{v} vs {}", re[0]);
    assert!(c.errors().is_empty());
}

#[test]
fn each_initiate_takes_the_next_sweep_and_rst_restarts_the_scan() {
    let inst = start("initiate", &[]);
    let mut c = Client::connect(&inst.addr);
    c.send("FORM REAL,32");
    let mut sweeps = Vec::new();
    for _ in 0..3 {
        c.send("INIT");
        assert_eq!(c.query("*OPC?"), "1");
        c.send("TRAC?");
        sweeps.push(decode(&c.block(), 201, Format::Real32, ByteOrder::Normal));
    }
    for (n, sweep) in sweeps.iter().enumerate() {
        let (index, re, im) = dumped(&inst.dump, n);
        assert_eq!(index as usize, n);
        assert_same(sweep, &re, &im);
    }
    // The turntable moves between sweeps, so consecutive sweeps differ.
    assert_ne!(sweeps[0], sweeps[1]);
    c.send("*RST;FORM REAL,32;INIT;*OPC?");
    assert_eq!(c.line(), "1");
    let (index, _, _) = dumped(&inst.dump, 3);
    assert_eq!(index, 0, "*RST restarts the scan at sweep 0");
}

#[test]
fn the_error_queue_reports_each_fault_in_order() {
    let inst = start("errors", &[]);
    let mut c = Client::connect(&inst.addr);
    assert_eq!(c.query("SYSTem:ERRor:NEXT?"), "0,\"No error\"");
    c.send("TRACe:DATA?"); // no sweep yet: no answer, an error
    c.send("FOO:BAR");
    c.send("FORM:DATA");
    c.send("FORM REAL,16");
    c.send("FORM INTeger");
    c.send("SWE:POIN 1");
    c.send("SWE:POIN many");
    c.send("FREQ:STAR 13 GHZ");
    c.send("FREQ:STAR 1 THZ");
    c.send("FREQ:STAR 60 GHZ");
    c.send("*IDN? extra");
    assert_eq!(c.query("SYST:ERR:COUN?"), "10");
    assert_eq!(
        c.errors(),
        [
            "-230,\"Data corrupt or stale\"",
            "-113,\"Undefined header\"",
            "-109,\"Missing parameter\"",
            "-224,\"Illegal parameter value\"",
            "-224,\"Illegal parameter value\"",
            "-222,\"Data out of range\"",
            "-104,\"Data type error\"",
            "-221,\"Settings conflict\"",
            "-131,\"Invalid suffix\"",
            "-350,\"Queue overflow\"",
        ]
    );
    // Command errors set bit 5 of the event status register, execution errors bit 4.
    assert_eq!(c.query("*ESR?"), "48");
    assert_eq!(c.query("syst:err?"), "0,\"No error\"");
    // The settings were left alone.
    assert_eq!(c.query("SWE:POIN?"), "201");
    assert_eq!(c.query("FREQ:STAR?").parse::<f64>().unwrap(), 8e9);

    // *CLS empties the queue.
    c.send("NOPE");
    assert_eq!(c.query("*STB?"), "4", "error queue not empty: bit 2");
    c.send("*CLS");
    assert_eq!(c.query("SYST:ERR?"), "0,\"No error\"");
    assert_eq!(c.query("*ESR?"), "0");
}

#[test]
fn clients_share_one_instrument() {
    let inst = start("clients", &[]);
    let mut a = Client::connect(&inst.addr);
    let mut b = Client::connect(&inst.addr);
    a.send("FORM REAL,64");
    assert_eq!(a.query("*OPC?"), "1");
    assert_eq!(b.query("FORM?"), "REAL,64");
    b.send("BAD:HEADER");
    assert_eq!(b.query("*OPC?"), "1");
    assert_eq!(a.query("SYST:ERR?"), "-113,\"Undefined header\"");
}

#[test]
fn a_scenario_file_sets_the_grid() {
    let s = concat!(env!("CARGO_MANIFEST_DIR"), "/scenarios/workshop-bay.toml");
    let text = std::fs::read_to_string(s).unwrap();
    let sc = sweepgate_host::model::scenario::Scenario::from_toml(&text).unwrap();
    let inst = start("scenario", &["--scenario", s]);
    let mut c = Client::connect(&inst.addr);
    assert_eq!(c.query("SWE:POIN?"), sc.sweep.points.to_string());
    assert_eq!(
        c.query("FREQ:STAR?").parse::<f64>().unwrap(),
        sc.sweep.start_hz
    );
}

#[test]
fn read_block_decodes_a_block_file_with_the_core_decoder() {
    let dir = instrument_support::temp_dir("readblock");
    let pts = [Complex32::new(0.5, -0.25), Complex32::new(-3.0, 1e-6)];
    let mut buf = [0u8; 64];
    let n =
        sweepgate::wire::block::emit(Format::Real64, ByteOrder::Swapped, &pts, &mut buf).unwrap();
    let file = dir.join("b.bin");
    std::fs::write(&file, &buf[..n]).unwrap();
    let run = |args: &[&str]| {
        std::process::Command::new(env!("CARGO_BIN_EXE_sweepgate"))
            .arg("read-block")
            .arg(&file)
            .args(args)
            .output()
            .unwrap()
    };
    let out = run(&[
        "--points",
        "2",
        "--format",
        "real64",
        "--byte-order",
        "swapped",
    ]);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v["re"][1].as_f64().unwrap() as f32, -3.0);
    assert_eq!(v["im"][1].as_f64().unwrap() as f32, 1e-6);
    let out = run(&[
        "--points",
        "3",
        "--format",
        "real64",
        "--byte-order",
        "swapped",
    ]);
    assert!(!out.status.success());
    assert!(String::from_utf8_lossy(&out.stderr).contains("the grid has 3"));
}
