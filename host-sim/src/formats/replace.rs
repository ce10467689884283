//! Writing a file so that it is either whole or absent: the bytes go to a temporary file in
//! the same folder, which is synced and then renamed over the target (a rename within one
//! file system is atomic), so a reader never sees half a file and a crash leaves the old
//! file or none.

use std::io::Write;
use std::path::{Path, PathBuf};

use anyhow::Context;

/// The temporary name beside `path`: `.<name>.<pid>.part`.
fn temporary(path: &Path) -> PathBuf {
    let name = path
        .file_name()
        .map_or("file".into(), |n| n.to_string_lossy().into_owned());
    path.with_file_name(format!(".{name}.{}.part", std::process::id()))
}

/// Writes `bytes` to `path` through a synced temporary file and a rename. On an error the
/// temporary file is removed and `path` is left as it was.
pub fn write_replacing(path: &Path, bytes: &[u8]) -> anyhow::Result<()> {
    let tmp = temporary(path);
    let written = (|| -> anyhow::Result<()> {
        let mut f =
            std::fs::File::create(&tmp).with_context(|| format!("creating {}", tmp.display()))?;
        f.write_all(bytes)
            .with_context(|| format!("writing {}", tmp.display()))?;
        f.sync_all()
            .with_context(|| format!("syncing {}", tmp.display()))?;
        std::fs::rename(&tmp, path)
            .with_context(|| format!("renaming {} to {}", tmp.display(), path.display()))
    })();
    if written.is_err() {
        let _ = std::fs::remove_file(&tmp);
    }
    written
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_file_is_replaced_and_no_temporary_is_left() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("a.csv");
        std::fs::write(&p, "old").unwrap();
        write_replacing(&p, b"new").unwrap();
        assert_eq!(std::fs::read_to_string(&p).unwrap(), "new");
        let names: Vec<_> = std::fs::read_dir(dir.path()).unwrap().collect();
        assert_eq!(names.len(), 1);
    }

    #[test]
    fn a_failed_write_leaves_the_old_file() {
        let dir = tempfile::tempdir().unwrap();
        // The target is a folder: the rename fails, the folder stays, the temporary goes.
        let p = dir.path().join("sub");
        std::fs::create_dir(&p).unwrap();
        std::fs::write(p.join("keep"), "x").unwrap();
        let e = write_replacing(&p, b"new").unwrap_err();
        assert!(format!("{e:#}").contains("renaming"), "{e:#}");
        assert!(p.join("keep").is_file());
        assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 1);
    }
}
