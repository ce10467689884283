//! A full disk under `simulate`, `replay --record` and the report: a small tmpfs (mounted
//! here when the test runs as root; otherwise `/dev/full`, which fails every write with
//! "no space", stands in for the outputs). Each command must exit non-zero, name the file it
//! could not write, and leave what was already on the disk untouched.

use std::path::{Path, PathBuf};
use std::process::{Command, Output, Stdio};

fn bin() -> Command {
    let mut c = Command::new(env!("CARGO_BIN_EXE_sweepgate"));
    c.stdin(Stdio::null());
    c
}

fn check_failed(name: &str, out: &Output, file: &str) {
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(!out.status.success(), "{name}: exit 0");
    assert!(!err.contains("panicked"), "{name}: {err}");
    assert!(err.contains(file), "{name}: {file:?} not named in {err}");
    assert!(
        err.contains("No space left on device"),
        "{name}: cause not kept in {err}"
    );
}

/// A 192 KiB tmpfs at a fresh folder, unmounted on drop.
struct Small(PathBuf);

impl Drop for Small {
    fn drop(&mut self) {
        let _ = Command::new("umount").arg(&self.0).status();
        let _ = std::fs::remove_dir(&self.0);
    }
}

fn small_disk() -> Option<Small> {
    let d = std::env::temp_dir().join(format!("sweepgate-full-{}", std::process::id()));
    std::fs::create_dir_all(&d).ok()?;
    let ok = Command::new("mount")
        .args(["-t", "tmpfs", "-o", "size=192k", "tmpfs"])
        .arg(&d)
        .stderr(Stdio::null())
        .status()
        .is_ok_and(|s| s.success());
    if ok {
        Some(Small(d))
    } else {
        std::fs::remove_dir(&d).ok();
        None
    }
}

#[test]
fn a_full_disk_is_named_and_loses_nothing_written_before() {
    let work = std::env::temp_dir().join(format!("sweepgate-fullsrc-{}", std::process::id()));
    std::fs::create_dir_all(&work).unwrap();
    let scen = Path::new(env!("CARGO_MANIFEST_DIR")).join("scenarios/demo-lab.toml");
    let rec = work.join("scan.rec");
    let out = bin()
        .args(["simulate", "--scenario"])
        .arg(&scen)
        .arg("--out")
        .arg(&rec)
        .output()
        .unwrap();
    assert!(out.status.success());
    let rec_bytes = std::fs::read(&rec).unwrap();

    let Some(disk) = small_disk() else {
        // Not root: /dev/full stands in for a full disk (every write fails with ENOSPC).
        println!("disk full: no tmpfs (not permitted); /dev/full stands in");
        let out = bin()
            .args(["simulate", "--scenario"])
            .arg(&scen)
            .args(["--out", "/dev/full"])
            .output()
            .unwrap();
        check_failed("simulate to /dev/full", &out, "/dev/full");
        return;
    };
    let d = &disk.0;
    let keep = d.join("keep.txt");
    std::fs::write(&keep, b"written before").unwrap();

    let out = bin()
        .args(["simulate", "--scenario"])
        .arg(&scen)
        .arg("--out")
        .arg(d.join("big.rec"))
        .output()
        .unwrap();
    check_failed("simulate", &out, "big.rec");
    std::fs::remove_file(d.join("big.rec")).ok();

    let out = bin()
        .args(["replay", "--as-fast-as-possible", "--no-preview"])
        .arg(&rec)
        .arg("--record")
        .arg(d.join("copy.rec"))
        .arg("--out")
        .arg(work.join("report"))
        .output()
        .unwrap();
    check_failed("replay --record", &out, "copy.rec");
    assert_eq!(std::fs::read(&rec).unwrap(), rec_bytes, "the input changed");
    std::fs::remove_file(d.join("copy.rec")).ok();

    // Fill the disk but for a few kB: the report folder is made, its table is not.
    std::fs::write(d.join("fill"), vec![0u8; 180 << 10]).unwrap();
    let out = bin()
        .args(["replay", "--as-fast-as-possible", "--no-preview"])
        .arg(&rec)
        .arg("--out")
        .arg(d.join("report"))
        .output()
        .unwrap();
    check_failed("report", &out, "report");
    assert_eq!(std::fs::read(&keep).unwrap(), b"written before");
    assert_eq!(std::fs::read(&rec).unwrap(), rec_bytes, "the input changed");
    drop(disk);
    report_over_a_full_disk(&rec, &work);
    println!("disk full: simulate, replay --record and the report each named the file");
    std::fs::remove_dir_all(&work).ok();
}

/// The folder's files and their bytes, by name.
fn contents(dir: &Path) -> Vec<(String, Vec<u8>)> {
    let mut v: Vec<(String, Vec<u8>)> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| {
            let e = e.unwrap();
            (
                e.file_name().to_string_lossy().into_owned(),
                std::fs::read(e.path()).unwrap(),
            )
        })
        .collect();
    v.sort();
    v
}

/// A report written whole on a 4 MiB tmpfs, then the disk filled but for 8 KiB and the
/// replay run again into the same folder (and `process` of the same recording with
/// exports). Expected: each exits non-zero naming a report file and the cause, and the
/// earlier report is still there byte for byte, with no temporary file beside it.
fn report_over_a_full_disk(rec: &Path, work: &Path) {
    let Some(disk) = small_disk_of("4m") else {
        return;
    };
    let report = disk.0.join("report");
    let out = bin()
        .args(["replay", "--as-fast-as-possible", "--no-preview"])
        .arg(rec)
        .arg("--out")
        .arg(&report)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let before = contents(&report);
    assert!(before.len() >= 3, "{before:?}");
    let fill = disk.0.join("fill");
    let mut f = std::fs::File::create(&fill).unwrap();
    while std::io::Write::write_all(&mut f, &[0u8; 4096]).is_ok() {}
    let len = f.metadata().unwrap().len();
    f.set_len(len.saturating_sub(8 << 10)).unwrap();
    f.sync_all().unwrap();
    drop(f);
    let replay = bin()
        .args(["replay", "--as-fast-as-possible", "--no-preview"])
        .arg(rec)
        .arg("--out")
        .arg(&report)
        .output()
        .unwrap();
    let process = bin()
        .arg("process")
        .arg(rec)
        .arg("--out")
        .arg(&report)
        .arg("--export-arrays")
        .arg(work.join("bands.npz"))
        .output()
        .unwrap();
    for (name, out) in [("report again", &replay), ("process report", &process)] {
        check_failed(name, out, "pattern.csv");
        assert_eq!(
            contents(&report),
            before,
            "{name}: the earlier report changed"
        );
    }
    println!(
        "disk full: replay and process named pattern.csv; the earlier report's {} files kept",
        before.len()
    );
}

/// A tmpfs of `size` at a fresh folder.
fn small_disk_of(size: &str) -> Option<Small> {
    let d = std::env::temp_dir().join(format!("sweepgate-full-{size}-{}", std::process::id()));
    std::fs::create_dir_all(&d).ok()?;
    let ok = Command::new("mount")
        .args(["-t", "tmpfs", "-o", &format!("size={size}"), "tmpfs"])
        .arg(&d)
        .stderr(Stdio::null())
        .status()
        .is_ok_and(|s| s.success());
    if ok {
        Some(Small(d))
    } else {
        std::fs::remove_dir(&d).ok();
        None
    }
}
