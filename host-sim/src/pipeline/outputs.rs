//! Checks on a command's outputs made before any work starts: an output that is one of the
//! inputs (the same file, by device and inode, whatever the path spelling) is refused, and
//! a report folder must be a folder this process can write.
//!
//! The files themselves are still written in place here; writing to a temporary name and
//! renaming it into place is the safe-output helpers' job (`formats/`).

use std::path::Path;

use anyhow::{bail, Context};

/// Whether `a` and `b` name the same existing file (same device and inode).
pub fn same_file(a: &Path, b: &Path) -> bool {
    use std::os::unix::fs::MetadataExt;
    match (std::fs::metadata(a), std::fs::metadata(b)) {
        (Ok(x), Ok(y)) => x.dev() == y.dev() && x.ino() == y.ino(),
        _ => false,
    }
}

/// Refuses `out` (named by `option`) when it is the same file as one of `inputs`.
pub fn refuse_output_is_input(option: &str, out: &Path, inputs: &[&Path]) -> anyhow::Result<()> {
    for input in inputs {
        if same_file(out, input) {
            bail!(
                "{option} {} is the input file {}: writing it would destroy the input; \
                 choose another output",
                out.display(),
                input.display()
            );
        }
    }
    Ok(())
}

/// Makes sure `dir` is (or can be created as) a folder this process can write, by creating
/// it and writing and removing a probe file in it.
pub fn check_report_dir(dir: &Path) -> anyhow::Result<()> {
    if dir.exists() && !dir.is_dir() {
        bail!("report folder {} exists and is not a folder", dir.display());
    }
    std::fs::create_dir_all(dir)
        .with_context(|| format!("creating report folder {}", dir.display()))?;
    let probe = dir.join(format!(".sweepgate-probe-{}", std::process::id()));
    std::fs::write(&probe, b"probe")
        .with_context(|| format!("report folder {} is not writable", dir.display()))?;
    std::fs::remove_file(&probe)
        .with_context(|| format!("removing the probe file {}", probe.display()))?;
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_same_file_through_another_spelling_is_refused() {
        let d = std::env::temp_dir().join(format!("sweepgate-outputs-{}", std::process::id()));
        std::fs::create_dir_all(d.join("sub")).unwrap();
        let f = d.join("a.rec");
        std::fs::write(&f, b"x").unwrap();
        let other = d.join("sub").join("..").join("a.rec");
        let e = refuse_output_is_input("--out", &other, &[&f]).unwrap_err();
        assert!(e.to_string().contains("is the input file"), "{e}");
        assert!(refuse_output_is_input("--out", &d.join("b.rec"), &[&f]).is_ok());
        let e = check_report_dir(&f).unwrap_err();
        assert!(e.to_string().contains("is not a folder"), "{e}");
        assert!(check_report_dir(&d.join("report")).is_ok());
        std::fs::remove_dir_all(&d).ok();
    }
}
