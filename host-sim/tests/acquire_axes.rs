//! `acquire` with a positioner of two axes: lines `<t_us> <angle_deg> <axis2_deg>` are
//! recorded as position records (the first axis, as before) with a kind 8 record of the
//! further axis beside each (`formats::traces`). A fake instrument and a fake positioner
//! written here stand in for the hardware.

use std::io::{BufRead, BufReader, Write};
use std::net::{TcpListener, TcpStream};
use std::process::Command;
use std::time::Duration;

use sweepgate_host::formats::recording::{recover_file, Record};
use sweepgate_host::formats::traces::Traces;

const POINTS: usize = 5;

/// An IEEE 488.2 block of `POINTS` REAL,32 big-endian pairs (1, −1), with its line end.
fn block() -> Vec<u8> {
    let mut body = Vec::new();
    for _ in 0..POINTS {
        body.extend_from_slice(&1f32.to_be_bytes());
        body.extend_from_slice(&(-1f32).to_be_bytes());
    }
    let len = body.len().to_string();
    let mut out = format!("#{}{len}", len.len()).into_bytes();
    out.extend_from_slice(&body);
    out.push(b'\n');
    out
}

fn serve(s: TcpStream) {
    let Ok(mut w) = s.try_clone() else { return };
    for line in BufReader::new(s).lines() {
        let Ok(line) = line else { return };
        let r = match line.trim() {
            "*OPC?" => w.write_all(b"1\n"),
            "D?" => w.write_all(&block()),
            _ => Ok(()),
        };
        if r.is_err() {
            return;
        }
    }
}

fn listen(f: impl Fn(TcpStream) + Send + Clone + 'static) -> String {
    let l = TcpListener::bind("127.0.0.1:0").unwrap();
    let addr = l.local_addr().unwrap().to_string();
    std::thread::spawn(move || {
        for s in l.incoming().flatten() {
            let f = f.clone();
            std::thread::spawn(move || f(s));
        }
    });
    addr
}

#[test]
fn a_second_axis_is_recorded_beside_each_position() {
    let d = std::env::temp_dir().join(format!("sweepgate-axes-{}", std::process::id()));
    std::fs::create_dir_all(&d).unwrap();
    let profile = d.join("fake.toml");
    std::fs::write(
        &profile,
        format!(
            "name = \"fake\"\ntimeout_s = 0.5\nwait = \"*OPC?\"\ndata = \"D?\"\n\
             format = \"real32\"\nbyte_order = \"normal\"\n\
             [grid]\nstart_hz = 1e9\nstop_hz = 2e9\npoints = {POINTS}\n"
        ),
    )
    .unwrap();
    let inst = listen(serve);
    // 40 samples at 20 ms: the first axis turns 0.5° a sample, the second steps from 0° to
    // 90° half-way, as between two cuts; one line has a bad second axis.
    let pos = listen(|mut s: TcpStream| {
        for i in 0..40u64 {
            let line = if i == 7 {
                format!("{} {} x\n", i * 20_000, i as f64 * 0.5)
            } else {
                let a2 = if i < 20 { 0.0 } else { 90.0 };
                format!("{} {} {a2}\n", i * 20_000, i as f64 * 0.5)
            };
            if s.write_all(line.as_bytes()).is_err() {
                return;
            }
            std::thread::sleep(Duration::from_millis(20));
        }
    });
    let out = d.join("scan.rec");
    let st = Command::new(env!("CARGO_BIN_EXE_sweepgate"))
        .args(["acquire", "--profile"])
        .arg(&profile)
        .args(["--instrument", &inst, "--positioner", &pos, "--out"])
        .arg(&out)
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&st.stderr);
    assert!(st.status.success(), "{err}");
    assert!(
        err.contains("bad axis2_deg"),
        "the bad line is reported: {err}"
    );
    let r = recover_file(&out).unwrap();
    let positions: Vec<(u64, f64)> = r
        .records
        .iter()
        .filter_map(|(_, rec)| match rec {
            Record::Position {
                t_us, angle_deg, ..
            } => Some((*t_us, *angle_deg)),
            _ => None,
        })
        .collect();
    assert_eq!(positions.len(), 39);
    let t = Traces::collect(&r.records);
    assert!(t.faults.is_empty());
    assert_eq!(t.axes.len(), 39);
    for (t_us, a1) in positions {
        // The line's own first angle tells which second-axis value it carried.
        let want = if a1 < 10.0 { 0.0 } else { 90.0 };
        assert_eq!(t.axes[&t_us], vec![want], "at {t_us} µs");
    }
    let _ = std::fs::remove_dir_all(&d);
}

/// A fake instrument with a second trace: `D?` answers (1, −1), `E?` answers (0.25, 0.5).
fn serve_two(s: TcpStream) {
    let Ok(mut w) = s.try_clone() else { return };
    let second = {
        let mut body = Vec::new();
        for _ in 0..POINTS {
            body.extend_from_slice(&0.25f32.to_be_bytes());
            body.extend_from_slice(&0.5f32.to_be_bytes());
        }
        let len = body.len().to_string();
        let mut out = format!("#{}{len}", len.len()).into_bytes();
        out.extend_from_slice(&body);
        out.push(b'\n');
        out
    };
    for line in BufReader::new(s).lines() {
        let Ok(line) = line else { return };
        let r = match line.trim() {
            "*OPC?" => w.write_all(b"1\n"),
            "D?" => w.write_all(&block()),
            "E?" => w.write_all(&second),
            _ => Ok(()),
        };
        if r.is_err() {
            return;
        }
    }
}

#[test]
fn a_profile_with_a_further_trace_records_both_traces_of_every_sweep() {
    let d = std::env::temp_dir().join(format!("sweepgate-traces-{}", std::process::id()));
    std::fs::create_dir_all(&d).unwrap();
    let profile = d.join("two.toml");
    std::fs::write(
        &profile,
        format!(
            "name = \"two\"\ntimeout_s = 0.5\nwait = \"*OPC?\"\ndata = \"D?\"\n\
             format = \"real32\"\nbyte_order = \"normal\"\nfirst_trace = \"S21\"\n\
             [grid]\nstart_hz = 1e9\nstop_hz = 2e9\npoints = {POINTS}\n\
             [[further_traces]]\nname = \"S31\"\ndata = \"E?\"\n"
        ),
    )
    .unwrap();
    let inst = listen(serve_two);
    let out = d.join("two.rec");
    let st = Command::new(env!("CARGO_BIN_EXE_sweepgate"))
        .args(["acquire", "--profile"])
        .arg(&profile)
        .args(["--instrument", &inst, "--sweeps", "6", "--out"])
        .arg(&out)
        .output()
        .unwrap();
    assert!(
        st.status.success(),
        "{}",
        String::from_utf8_lossy(&st.stderr)
    );
    let r = recover_file(&out).unwrap();
    let t = Traces::collect(&r.records);
    assert!(t.faults.is_empty());
    assert_eq!(t.names.as_ref().unwrap().traces, ["S21", "S31"]);
    let sweeps: Vec<u32> = r
        .records
        .iter()
        .filter_map(|(_, rec)| match rec {
            Record::Sweep { index, s21, .. } => {
                assert!(s21
                    .iter()
                    .all(|v| *v == num_complex::Complex32::new(1.0, -1.0)));
                Some(*index)
            }
            _ => None,
        })
        .collect();
    assert_eq!(sweeps, (0..6).collect::<Vec<u32>>());
    assert_eq!(t.further.keys().copied().collect::<Vec<u32>>(), sweeps);
    for traces in t.further.values() {
        assert_eq!(traces.len(), 1);
        assert!(traces[0]
            .iter()
            .all(|v| *v == num_complex::Complex32::new(0.25, 0.5)));
    }
    // A profile naming a trace twice, or a further trace read by a command, is refused.
    use sweepgate_host::link::acquire::Profile;
    let base = "name = 'x'\ndata = 'D?'\nformat = 'real32'\n[grid]\nstart_hz = 1e9\nstop_hz = 2e9\npoints = 5\n";
    let e = Profile::from_toml(&format!(
        "{base}[[further_traces]]\nname = 'S21'\ndata = 'E?'\n"
    ))
    .unwrap_err()
    .to_string();
    assert!(e.contains("given twice"), "{e}");
    let e = Profile::from_toml(&format!(
        "{base}[[further_traces]]\nname = 'S31'\ndata = 'E'\n"
    ))
    .unwrap_err()
    .to_string();
    assert!(e.contains("must be a query"), "{e}");
    let _ = std::fs::remove_dir_all(&d);
}
