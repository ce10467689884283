//! Fuzz the manifest reader (`sweepgate_host::formats::manifest::Manifest::parse_str`) with
//! arbitrary text (invalid UTF-8 read lossily) against a folder holding two Touchstone
//! files, `a.s2p` and `b.s2p`. Checks that nothing panics; that a manifest that parses has
//! at least one row, no more rows than lines, rows in increasing line order with finite,
//! distinct angles, each naming an existing file; and that an error is one line naming the
//! manifest.
#![no_main]

use std::path::PathBuf;
use std::sync::OnceLock;

use libfuzzer_sys::fuzz_target;
use sweepgate_host::formats::manifest::Manifest;

/// The folder the manifest's files are resolved against, made once per process.
fn base() -> &'static PathBuf {
    static BASE: OnceLock<PathBuf> = OnceLock::new();
    BASE.get_or_init(|| {
        let d =
            std::env::temp_dir().join(format!("sweepgate-fuzz-manifest-{}", std::process::id()));
        std::fs::create_dir_all(&d).expect("fuzz folder");
        for name in ["a.s2p", "b.s2p"] {
            std::fs::write(d.join(name), "# MHz S RI\n1 0 0 0.5 0 0 0 0 0\n").expect("file");
        }
        d
    })
}

fuzz_target!(|data: &[u8]| {
    let text = String::from_utf8_lossy(data);
    match Manifest::parse_str(&text, "fuzz.csv", base()) {
        Ok(m) => {
            let rows = m.rows();
            assert!(!rows.is_empty());
            assert!(rows.len() <= text.lines().count());
            assert!(rows.windows(2).all(|w| w[0].line < w[1].line));
            for (i, r) in rows.iter().enumerate() {
                assert!(r.angle_deg.is_finite());
                assert!(rows[..i].iter().all(|q| q.angle_deg != r.angle_deg));
                assert!(r.file.is_file(), "{}", r.file.display());
            }
            assert_eq!(m.name(), "fuzz.csv");
        }
        Err(e) => {
            let s = e.to_string();
            assert!(!s.contains('\n'), "multi-line message: {s}");
            assert!(s.starts_with("fuzz.csv"), "{s}");
        }
    }
});
