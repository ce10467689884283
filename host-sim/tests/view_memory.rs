//! `view` memory on hostile streams: the peak resident memory of the `sweepgate view`
//! process (VmHWM in /proc/<pid>/status, the kernel's high-water mark, read every 2 ms
//! until the process ends) on 200 MB of zeros and 200 MB of pseudo-random bytes, neither
//! holding a preview record. Expected: each is refused ("no preview record in the
//! 200000000 bytes read"), within a deadline, with a peak under [`PEAK_LIMIT_KB`] and no
//! more than [`GROWTH_LIMIT_KB`] above the peak on 1 MB of the same bytes, so memory does
//! not follow the stream's length. Linux only (the figure comes from /proc).

use std::io::Write;
use std::path::Path;
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

/// Largest peak allowed, kB (the debug build measured about 9 MB on both streams).
const PEAK_LIMIT_KB: u64 = 32 << 10;

/// Largest growth allowed from a 1 MB stream to a 200 MB one, kB.
const GROWTH_LIMIT_KB: u64 = 4 << 10;

/// Bytes of the long streams.
const LONG_BYTES: usize = 200_000_000;

/// VmHWM of a process, kB (`None` once it has exited).
fn vm_hwm_kb(pid: u32) -> Option<u64> {
    let status = std::fs::read_to_string(format!("/proc/{pid}/status")).ok()?;
    status
        .lines()
        .find_map(|l| l.strip_prefix("VmHWM:"))
        .and_then(|v| v.trim().trim_end_matches("kB").trim().parse().ok())
}

/// Runs `view` on `file` under a 120 s deadline; returns its peak memory (kB) and its
/// standard error.
fn view_peak(file: &Path) -> (u64, String) {
    let mut child = Command::new(env!("CARGO_BIN_EXE_sweepgate"))
        .args(["view", "--no-preview", "--from"])
        .arg(file)
        .stdin(Stdio::null())
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let pid = child.id();
    let started = Instant::now();
    let mut peak = 0;
    let status = loop {
        if let Some(kb) = vm_hwm_kb(pid) {
            peak = peak.max(kb);
        }
        if let Some(s) = child.try_wait().unwrap() {
            break s;
        }
        if started.elapsed() > Duration::from_secs(120) {
            child.kill().ok();
            panic!("view of {} still running after 120 s", file.display());
        }
        std::thread::sleep(Duration::from_millis(2));
    };
    let mut err = String::new();
    std::io::Read::read_to_string(&mut child.stderr.take().unwrap(), &mut err).unwrap();
    assert!(!status.success(), "{}: exit 0", file.display());
    assert!(!err.contains("panicked"), "{err}");
    (peak, err)
}

/// Writes `len` bytes made by `byte(i)` to `path`, a megabyte at a time.
fn write_stream(path: &Path, len: usize, byte: impl Fn(usize) -> u8) {
    let mut f = std::io::BufWriter::new(std::fs::File::create(path).unwrap());
    let mut chunk = vec![0u8; 1 << 20];
    let mut at = 0;
    while at < len {
        let n = chunk.len().min(len - at);
        for (k, b) in chunk[..n].iter_mut().enumerate() {
            *b = byte(at + k);
        }
        f.write_all(&chunk[..n]).unwrap();
        at += n;
    }
    f.flush().unwrap();
}

#[test]
fn view_memory_stays_bounded_on_long_hostile_streams() {
    if !Path::new("/proc/self/status").exists() {
        println!("view memory: no /proc here; not measured");
        return;
    }
    let d = tempfile::tempdir().unwrap();
    // Multiplicative hashing (Knuth's 2654435761) of the offset: no COBS frame survives
    // its CRC by chance in practice, and zeros are all delimiters.
    let garbage = |i: usize| ((i as u32).wrapping_mul(2_654_435_761) >> 13) as u8;
    let zero = |_: usize| 0u8;
    let mut figures = Vec::new();
    for (name, byte) in [
        ("zeros", &zero as &dyn Fn(usize) -> u8),
        ("garbage", &garbage),
    ] {
        let short = d.path().join(format!("{name}-1MB.bin"));
        write_stream(&short, 1_000_000, byte);
        let long = d.path().join(format!("{name}-200MB.bin"));
        write_stream(&long, LONG_BYTES, byte);
        let (small_kb, _) = view_peak(&short);
        let (peak_kb, err) = view_peak(&long);
        assert!(
            err.contains(&format!("no preview record in the {LONG_BYTES} bytes read")),
            "{name}: {err}"
        );
        assert!(
            peak_kb > 0 && peak_kb < PEAK_LIMIT_KB,
            "{name}: peak {peak_kb} kB (limit {PEAK_LIMIT_KB} kB)"
        );
        assert!(
            peak_kb <= small_kb + GROWTH_LIMIT_KB,
            "{name}: peak {peak_kb} kB on 200 MB against {small_kb} kB on 1 MB"
        );
        std::fs::remove_file(&long).unwrap();
        figures.push(format!(
            "{name}: VmHWM {peak_kb} kB on 200 MB, {small_kb} kB on 1 MB"
        ));
    }
    println!("view memory: {}", figures.join("; "));
}
