//! Safe file handling for the commands: outputs that appear whole or not at all, output
//! folders checked before any work starts, outputs refused when they are one of the inputs,
//! and whole-file reads with a size cap.
//!
//! - [`write_atomic`] and [`AtomicFile`] write to a temporary file beside the target
//!   (`.NAME.PID-N.partial`, in the same folder so that the rename cannot cross file
//!   systems), sync it, rename it over the target and sync the folder. Until the rename the
//!   target is untouched: a full disk, a killed process or an error leaves the old file as it
//!   was, and the temporary file is removed (except after SIGKILL or a power cut, when a
//!   `.partial` file may stay behind; it is never read). The new file has the default
//!   permissions of a new file; a symbolic link at the target is replaced, not followed.
//! - [`refuse_if_same_file`] compares files by identity (device and inode on Unix, the
//!   canonical path elsewhere), so hard links, symbolic links and `./a` against `a` are
//!   caught.
//! - [`check_output_dir`] creates the folder if needed and proves it writable by creating,
//!   writing and removing a small file.
//! - [`read_capped`] refuses folders, devices, pipes and files over a cap before reading a
//!   byte.
//!
//! Every error is a [`FileError`] naming the file; the operating system's reason is its
//! [`source`](std::error::Error::source), so `{:#}` through `anyhow` prints one line such as
//! `writing out/pattern.csv: No space left on device (os error 28)`.
//!
//! ```
//! use sweepgate_host::formats::files::{check_output_dir, write_atomic, AtomicFile};
//! use std::io::Write;
//! let dir = std::env::temp_dir().join(format!("sweepgate-files-doc-{}", std::process::id()));
//! check_output_dir(&dir).unwrap();
//! write_atomic(&dir.join("summary.json"), b"{}\n").unwrap();
//! let mut f = AtomicFile::create(&dir.join("pattern.csv")).unwrap();
//! writeln!(f, "angle_deg,gated_db").unwrap();
//! f.finish().unwrap();
//! assert_eq!(std::fs::read(dir.join("summary.json")).unwrap(), b"{}\n");
//! std::fs::remove_dir_all(&dir).unwrap();
//! ```

use std::fmt;
use std::fs::{self, File, OpenOptions};
use std::io::{self, BufWriter, Read, Write};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};

use crate::limits::MAX_SYNC_THREADS;

/// Why a file could not be read or written; every variant names the file.
#[derive(Debug)]
pub enum FileError {
    /// The operating system refused (`source` says why).
    Io {
        /// What was being done, e.g. `"writing"`.
        action: &'static str,
        /// The file or folder.
        path: PathBuf,
        /// The operating system's error.
        source: io::Error,
    },
    /// A folder was given where a file was expected.
    IsAFolder {
        /// The path given.
        path: PathBuf,
        /// What was expected, e.g. `"recording"`.
        what: &'static str,
    },
    /// Something other than a regular file or a folder (a device, a pipe, a socket) was given
    /// where a file was expected: not opened, as opening a pipe waits for a writer.
    NotARegularFile {
        /// The path given.
        path: PathBuf,
        /// What was expected, e.g. `"recording"`.
        what: &'static str,
    },
    /// An output folder path names something other than a folder.
    NotAFolder {
        /// The path given.
        path: PathBuf,
    },
    /// The file is larger than the cap for its kind; it was not read.
    TooLarge {
        /// The file.
        path: PathBuf,
        /// Its size when known (`None`: it grew while being read).
        size: Option<u64>,
        /// The cap, bytes.
        cap: u64,
        /// What the file was read as.
        what: &'static str,
    },
    /// An output is one of the inputs.
    SameFile {
        /// The output path given.
        output: PathBuf,
        /// The input path it is the same file as.
        input: PathBuf,
    },
}

/// A byte count in words: `1 GiB` for whole binary units, else bytes.
fn size_text(n: u64) -> String {
    for (shift, unit) in [(30, "GiB"), (20, "MiB"), (10, "KiB")] {
        if n >= 1 << shift && n % (1 << shift) == 0 {
            return format!("{} {unit}", n >> shift);
        }
    }
    format!("{n} bytes")
}

impl FileError {
    /// Why a file could not be read, without its path, for errors that name the file
    /// themselves: "a folder, not a recording", "… bytes, over the 1 GiB limit for a
    /// recording; it was not read", or the operating system's words.
    pub fn reason(&self) -> String {
        match self {
            FileError::Io { source, .. } => source.to_string(),
            FileError::IsAFolder { what, .. } => format!("a folder, not a {what}"),
            FileError::NotARegularFile { what, .. } => format!(
                "not a regular file (a device, a pipe or a socket), not a {what}; it was not read"
            ),
            FileError::TooLarge {
                size, cap, what, ..
            } => {
                let size = match size {
                    Some(n) => format!("{n} bytes"),
                    None => format!("more than {cap} bytes"),
                };
                format!(
                    "{size}, over the {} limit for a {what}; it was not read",
                    size_text(*cap)
                )
            }
            other => other.to_string(),
        }
    }
}

impl fmt::Display for FileError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            FileError::Io { action, path, .. } => write!(f, "{action} {}", path.display()),
            FileError::IsAFolder { path, .. }
            | FileError::NotARegularFile { path, .. }
            | FileError::TooLarge { path, .. } => {
                write!(f, "{} is {}", path.display(), self.reason())
            }
            FileError::NotAFolder { path } => {
                write!(f, "{} exists and is not a folder", path.display())
            }
            FileError::SameFile { output, input } => write!(
                f,
                "{} is the input file {}: writing it would destroy the input; choose another \
                 output",
                output.display(),
                input.display()
            ),
        }
    }
}

impl std::error::Error for FileError {
    fn source(&self) -> Option<&(dyn std::error::Error + 'static)> {
        match self {
            FileError::Io { source, .. } => Some(source),
            _ => None,
        }
    }
}

fn io_err<'a>(action: &'static str, path: &'a Path) -> impl FnOnce(io::Error) -> FileError + 'a {
    move |source| FileError::Io {
        action,
        path: path.to_path_buf(),
        source,
    }
}

/// Reads the whole file at `path` if it is at most `cap` bytes. Folders, anything else that
/// is not a regular file (a device, a pipe: never opened) and larger files are refused before
/// anything is read; a file that grows past `cap` while being read is
/// refused too. `what` names the kind of file in messages ("recording").
pub fn read_capped(path: &Path, cap: u64, what: &'static str) -> Result<Vec<u8>, FileError> {
    let meta = fs::metadata(path).map_err(io_err("reading", path))?;
    if meta.is_dir() {
        return Err(FileError::IsAFolder {
            path: path.to_path_buf(),
            what,
        });
    }
    let too_large = |size| FileError::TooLarge {
        path: path.to_path_buf(),
        size,
        cap,
        what,
    };
    if !meta.is_file() {
        return Err(FileError::NotARegularFile {
            path: path.to_path_buf(),
            what,
        });
    }
    if meta.len() > cap {
        return Err(too_large(Some(meta.len())));
    }
    let file = File::open(path).map_err(io_err("reading", path))?;
    let mut buf = Vec::with_capacity(meta.len() as usize);
    file.take(cap.saturating_add(1))
        .read_to_end(&mut buf)
        .map_err(io_err("reading", path))?;
    if buf.len() as u64 > cap {
        return Err(too_large(None));
    }
    Ok(buf)
}

/// The folder a path's file lives in (`.` for a bare name).
fn folder_of(path: &Path) -> &Path {
    match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p,
        _ => Path::new("."),
    }
}

/// A fresh name beside `path` for a temporary file: `.NAME.PID-N.partial`.
fn temp_beside(path: &Path, name: &str) -> PathBuf {
    static COUNT: AtomicU64 = AtomicU64::new(0);
    let n = COUNT.fetch_add(1, Ordering::Relaxed);
    folder_of(path).join(format!(".{name}.{}-{n}.partial", std::process::id()))
}

/// Syncs a folder so that a rename or a new entry in it survives a power cut (POSIX asks
/// for an fsync of the folder; file systems that cannot sync a folder are let be).
fn sync_folder(dir: &Path) -> io::Result<()> {
    #[cfg(unix)]
    {
        match File::open(dir).and_then(|d| d.sync_all()) {
            Err(e) if e.kind() == io::ErrorKind::InvalidInput => Ok(()),
            other => other,
        }
    }
    #[cfg(not(unix))]
    {
        let _ = dir;
        Ok(())
    }
}

/// An output file written under a temporary name and renamed over the target by
/// [`AtomicFile::finish`]; dropped without `finish`, it removes the temporary file and leaves
/// the target as it was. Writes are buffered; a write error names the target file.
#[derive(Debug)]
pub struct AtomicFile {
    target: PathBuf,
    temp: PathBuf,
    file: Option<BufWriter<File>>,
    renamed: bool,
}

impl AtomicFile {
    /// Creates the temporary file beside `path` (the folder must exist).
    pub fn create(path: &Path) -> Result<Self, FileError> {
        let name = path
            .file_name()
            .ok_or_else(|| FileError::Io {
                action: "writing",
                path: path.to_path_buf(),
                source: io::Error::new(io::ErrorKind::InvalidInput, "the path names no file"),
            })?
            .to_string_lossy()
            .into_owned();
        let mut tries = 0;
        loop {
            let temp = temp_beside(path, &name);
            match OpenOptions::new().write(true).create_new(true).open(&temp) {
                Ok(f) => {
                    return Ok(Self {
                        target: path.to_path_buf(),
                        temp,
                        file: Some(BufWriter::with_capacity(1 << 16, f)),
                        renamed: false,
                    })
                }
                Err(e) if e.kind() == io::ErrorKind::AlreadyExists && tries < 16 => tries += 1,
                Err(e) => return Err(io_err("creating a temporary file to write", path)(e)),
            }
        }
    }

    /// The target path.
    pub fn path(&self) -> &Path {
        &self.target
    }

    /// Flushes and syncs the data, renames it over the target and syncs the folder. On an
    /// error before the rename the target is untouched and the temporary file removed.
    pub fn finish(mut self) -> Result<(), FileError> {
        self.make_ready()?;
        self.rename_over()
    }

    /// Flushes, syncs and closes the temporary file: every byte is on the disk under the
    /// temporary name and only the rename is left. The target is untouched.
    fn make_ready(&mut self) -> Result<(), FileError> {
        let target = &self.target;
        let Some(file) = self.file.take() else {
            return Ok(());
        };
        let file = file
            .into_inner()
            .map_err(|e| io_err("writing", target)(e.into_error()))?;
        file.sync_all().map_err(io_err("syncing", target))
    }

    /// Renames the (ready) temporary file over the target and syncs the folder.
    fn rename_over(self) -> Result<(), FileError> {
        let target = self.target.clone();
        self.rename_into_place()?;
        sync_folder(folder_of(&target)).map_err(io_err("syncing the folder of", &target))
    }

    /// Renames the (ready) temporary file over the target; the folder is not synced.
    fn rename_into_place(mut self) -> Result<(), FileError> {
        fs::rename(&self.temp, &self.target).map_err(io_err("replacing", &self.target))?;
        self.renamed = true;
        Ok(())
    }

    fn named(&self, e: io::Error) -> io::Error {
        io::Error::new(
            e.kind(),
            FileError::Io {
                action: "writing",
                path: self.target.clone(),
                source: e,
            },
        )
    }

    fn file(&mut self) -> io::Result<&mut BufWriter<File>> {
        self.file
            .as_mut()
            .ok_or_else(|| io::Error::other("the file is already finished"))
    }
}

impl Write for AtomicFile {
    fn write(&mut self, buf: &[u8]) -> io::Result<usize> {
        match self.file()?.write(buf) {
            Ok(n) => Ok(n),
            Err(e) => Err(self.named(e)),
        }
    }

    fn flush(&mut self) -> io::Result<()> {
        match self.file()?.flush() {
            Ok(()) => Ok(()),
            Err(e) => Err(self.named(e)),
        }
    }
}

impl Drop for AtomicFile {
    fn drop(&mut self) {
        if !self.renamed {
            // Close first (a buffered write error here is moot: the file is discarded).
            drop(self.file.take().map(BufWriter::into_parts));
            let _ = fs::remove_file(&self.temp);
        }
    }
}

/// Writes `bytes` to `path` whole or not at all (see the module docs). On an error the old
/// file at `path`, if any, is untouched and the error names `path`.
pub fn write_atomic(path: &Path, bytes: &[u8]) -> Result<(), FileError> {
    let mut f = AtomicFile::create(path)?;
    if let Some(inner) = f.file.as_mut() {
        inner.write_all(bytes).map_err(io_err("writing", path))?;
    }
    f.finish()
}

/// Writes a set of files that belong together (a report folder) so that a failure leaves
/// the old set: every file is first written and synced under a temporary name beside its
/// target, and only when all of them are on the disk are they renamed over their targets,
/// in the order given, and then each folder they are in is synced once. The files are
/// written and synced at the same time, on up to [`MAX_SYNC_THREADS`] threads (they wait on
/// the disk, and the file system commits syncs that wait together once), so that a set
/// costs about one sync's wait, not one per file. A full disk, an unwritable folder, a
/// target that is a folder or any other error while writing leaves every target as it was
/// and removes the temporary files; the error names the file that could not be written
/// (the first such in the set's order). (A rename failing after
/// others succeeded, which needs no space and does not happen on a healthy local file
/// system, would leave the files named before it new and the rest old; the error names the
/// file.)
pub fn write_set(files: &[(PathBuf, Vec<u8>)]) -> Result<(), FileError> {
    let mut set = StagedSet::default();
    set.stage(files)?;
    crate::phase_times::mark("files written and synced");
    set.commit()?;
    crate::phase_times::mark("files renamed");
    Ok(())
}

/// A set of files (a report folder) written as [`write_set`] writes one, given in parts:
/// each part is written and synced under temporary names when it is staged, so its bytes
/// can be let go before the next part is made; [`StagedSet::commit`] renames them all over
/// their targets at the end. Dropped without a commit (an error in a later part), it
/// removes every temporary file and leaves every target as it was.
#[derive(Debug, Default)]
pub struct StagedSet {
    staged: Vec<AtomicFile>,
}

impl StagedSet {
    /// Writes and syncs `files` under their temporary names, on up to
    /// [`MAX_SYNC_THREADS`] threads; the error names the first file (in the given order)
    /// that could not be written.
    pub fn stage(&mut self, files: &[(PathBuf, Vec<u8>)]) -> Result<(), FileError> {
        let threads = files.len().min(MAX_SYNC_THREADS);
        let staged = crate::threads::map_blocks(
            files,
            threads,
            1,
            || (),
            |_, set| set.iter().map(|(path, bytes)| stage(path, bytes)).collect(),
        );
        for f in staged {
            self.staged.push(f?);
        }
        Ok(())
    }

    /// Writes one file of the set as `write` makes it, a piece at a time (a large table
    /// need not be held whole), and syncs it under its temporary name.
    pub fn stage_written(
        &mut self,
        path: &Path,
        write: impl FnOnce(&mut dyn Write) -> io::Result<()>,
    ) -> Result<(), FileError> {
        self.staged.push(stage_written(path, write)?);
        Ok(())
    }

    /// Renames every staged file over its target, in the order staged, then syncs each
    /// folder they are in once.
    pub fn commit(self) -> Result<(), FileError> {
        let mut folders: Vec<PathBuf> = Vec::new();
        for f in self.staged {
            let folder = folder_of(&f.target).to_path_buf();
            f.rename_into_place()?;
            if !folders.contains(&folder) {
                folders.push(folder);
            }
        }
        for folder in &folders {
            sync_folder(folder).map_err(io_err("syncing the folder", folder))?;
        }
        Ok(())
    }
}

/// One file of a set written and synced under its temporary name, ready to be renamed
/// over `path` (refused when `path` is a folder).
fn stage(path: &Path, bytes: &[u8]) -> Result<AtomicFile, FileError> {
    stage_written(path, |w| w.write_all(bytes))
}

/// One file of a set written by `write` (through a buffer) and synced under its temporary
/// name, as [`stage`].
fn stage_written(
    path: &Path,
    write: impl FnOnce(&mut dyn Write) -> io::Result<()>,
) -> Result<AtomicFile, FileError> {
    let mut f = AtomicFile::create(path)?;
    if let Some(inner) = f.file.as_mut() {
        write(inner).map_err(io_err("writing", path))?;
    }
    f.make_ready()?;
    if fs::metadata(path).is_ok_and(|m| m.is_dir()) {
        return Err(FileError::IsAFolder {
            path: path.to_path_buf(),
            what: "file",
        });
    }
    Ok(f)
}

/// What makes two paths the same file.
#[derive(Debug, PartialEq, Eq)]
enum Identity {
    #[cfg(unix)]
    Inode(u64, u64),
    #[cfg(not(unix))]
    Canonical(PathBuf),
}

/// The identity of the file at `path`, `None` when nothing is there.
fn identity(path: &Path) -> Result<Option<Identity>, FileError> {
    #[cfg(unix)]
    let found = {
        use std::os::unix::fs::MetadataExt;
        fs::metadata(path).map(|m| Identity::Inode(m.dev(), m.ino()))
    };
    #[cfg(not(unix))]
    let found = fs::canonicalize(path).map(Identity::Canonical);
    match found {
        Ok(id) => Ok(Some(id)),
        Err(e) if e.kind() == io::ErrorKind::NotFound => Ok(None),
        Err(e) => Err(io_err("checking", path)(e)),
    }
}

/// Refuses `output` when it is the same file as one of `inputs` (see the module docs); an
/// output that does not exist yet is no input.
pub fn refuse_if_same_file(output: &Path, inputs: &[&Path]) -> Result<(), FileError> {
    let Some(out) = identity(output)? else {
        return Ok(());
    };
    for input in inputs {
        if identity(input)?.as_ref() == Some(&out) {
            return Err(FileError::SameFile {
                output: output.to_path_buf(),
                input: input.to_path_buf(),
            });
        }
    }
    Ok(())
}

/// Makes sure `dir` can take outputs before any work starts: creates it (and its parents)
/// when missing, refuses a path that is not a folder, and proves it writable by creating,
/// writing one byte to and removing a temporary file.
pub fn check_output_dir(dir: &Path) -> Result<(), FileError> {
    match fs::metadata(dir) {
        Ok(m) if m.is_dir() => {}
        Ok(_) => {
            return Err(FileError::NotAFolder {
                path: dir.to_path_buf(),
            })
        }
        Err(e) if e.kind() == io::ErrorKind::NotFound => {
            fs::create_dir_all(dir).map_err(io_err("creating the folder", dir))?;
        }
        Err(e) => return Err(io_err("checking the folder", dir)(e)),
    }
    let probe = temp_beside(&dir.join("write-check"), "write-check");
    let wrote = OpenOptions::new()
        .write(true)
        .create_new(true)
        .open(&probe)
        .and_then(|mut f| {
            let r = f.write_all(b"0").and_then(|()| f.sync_all());
            drop(f);
            let removed = fs::remove_file(&probe);
            r.and(removed)
        });
    wrote.map_err(io_err("writing a test file in the folder", dir))
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::process::Command;

    /// The error and its sources on one line, as `anyhow`'s `{:#}` prints them.
    fn chain(e: &dyn std::error::Error) -> String {
        let mut s = e.to_string();
        let mut next = e.source();
        while let Some(c) = next {
            s.push_str(": ");
            s.push_str(&c.to_string());
            next = c.source();
        }
        s
    }

    fn listing(dir: &Path) -> Vec<String> {
        let mut v: Vec<String> = fs::read_dir(dir)
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .collect();
        v.sort();
        v
    }

    /// A tmpfs mounted for one test, unmounted when dropped.
    struct Mount {
        dir: PathBuf,
    }

    impl Mount {
        /// `None` when mounting is not permitted (not root, or no mount namespace).
        fn tmpfs(name: &str, options: &str) -> Option<Mount> {
            let dir =
                std::env::temp_dir().join(format!("sweepgate-files-{name}-{}", std::process::id()));
            fs::create_dir_all(&dir).ok()?;
            let ok = Command::new("mount")
                .args(["-t", "tmpfs", "-o", options, "tmpfs"])
                .arg(&dir)
                .stderr(std::process::Stdio::null())
                .status()
                .is_ok_and(|s| s.success());
            if ok {
                Some(Mount { dir })
            } else {
                fs::remove_dir(&dir).ok();
                None
            }
        }
    }

    impl Drop for Mount {
        fn drop(&mut self) {
            let _ = Command::new("umount").arg(&self.dir).status();
            let _ = fs::remove_dir(&self.dir);
        }
    }

    #[test]
    fn write_atomic_replaces_the_file_whole_and_leaves_nothing_behind() {
        let d = tempfile::tempdir().unwrap();
        let p = d.path().join("summary.json");
        write_atomic(&p, b"old").unwrap();
        write_atomic(&p, b"new contents").unwrap();
        assert_eq!(fs::read(&p).unwrap(), b"new contents");
        assert_eq!(listing(d.path()), ["summary.json"]);
        // A bare file name writes in the current folder's terms (folder ".").
        assert_eq!(folder_of(Path::new("x.csv")), Path::new("."));
    }

    #[test]
    fn a_streaming_file_appears_only_at_finish_and_vanishes_when_dropped() {
        let d = tempfile::tempdir().unwrap();
        let p = d.path().join("pattern.csv");
        fs::write(&p, b"old").unwrap();
        let mut f = AtomicFile::create(&p).unwrap();
        assert_eq!(f.path(), p);
        for i in 0..10_000 {
            writeln!(f, "{i},1.0").unwrap();
        }
        f.flush().unwrap();
        assert_eq!(
            fs::read(&p).unwrap(),
            b"old",
            "target untouched before finish"
        );
        assert_eq!(listing(d.path()).len(), 2, "target and the temporary file");
        f.finish().unwrap();
        let text = fs::read_to_string(&p).unwrap();
        assert_eq!(text.lines().count(), 10_000);
        assert_eq!(listing(d.path()), ["pattern.csv"]);

        let mut f = AtomicFile::create(&p).unwrap();
        f.write_all(b"abandoned").unwrap();
        drop(f);
        assert_eq!(fs::read_to_string(&p).unwrap(), text);
        assert_eq!(listing(d.path()), ["pattern.csv"]);
    }

    #[test]
    fn a_full_disk_loses_nothing_already_written_and_names_the_file() {
        let Some(m) = Mount::tmpfs("full", "size=64k") else {
            // Without permission to mount, the write error path is shown on /dev/full.
            println!("tmpfs not mountable here: the disk-full case runs on /dev/full");
            let mut f = AtomicFile {
                target: PathBuf::from("/dev/full"),
                temp: PathBuf::from("/nonexistent/never-created"),
                file: Some(BufWriter::new(
                    OpenOptions::new().write(true).open("/dev/full").unwrap(),
                )),
                renamed: true,
            };
            let e = f.write_all(&[0u8; 1 << 17]).unwrap_err();
            assert!(chain(&e).contains("/dev/full"), "{}", chain(&e));
            return;
        };
        let p = m.dir.join("report.csv");
        let old = vec![b'a'; 10_000];
        write_atomic(&p, &old).unwrap();

        // One write far over the free space.
        let e = write_atomic(&p, &vec![b'b'; 200_000]).unwrap_err();
        let msg = chain(&e);
        assert!(msg.contains(&*p.to_string_lossy()), "{msg}");
        assert!(
            matches!(&e, FileError::Io { source, .. } if source.raw_os_error() == Some(28)),
            "ENOSPC expected: {msg}"
        );
        assert!(!msg.contains('\n'));
        assert_eq!(fs::read(&p).unwrap(), old, "the old file is untouched");
        assert_eq!(listing(&m.dir), ["report.csv"], "no temporary file left");

        // Streaming, in small writes, until the disk is full.
        let q = m.dir.join("big.csv");
        let mut f = AtomicFile::create(&q).unwrap();
        let e = loop {
            if let Err(e) = f.write_all(&[b'c'; 4096]) {
                break e;
            }
        };
        let msg = chain(&e);
        assert!(
            msg.starts_with(&format!("writing {}", q.display())),
            "{msg}"
        );
        assert!(msg.contains("No space left"), "{msg}");
        drop(f);
        assert_eq!(fs::read(&p).unwrap(), old);
        assert!(!q.exists());
        assert_eq!(listing(&m.dir), ["report.csv"]);

        // The folder check sees the full disk before any work starts.
        let filler = m.dir.join("filler");
        let mut g = File::create(&filler).unwrap();
        while g.write_all(&[0u8; 4096]).is_ok() {}
        drop(g);
        let e = check_output_dir(&m.dir).unwrap_err();
        assert!(
            chain(&e).contains("writing a test file in the folder"),
            "{e}"
        );
        fs::remove_file(&filler).unwrap();
        check_output_dir(&m.dir).unwrap();
        assert_eq!(listing(&m.dir), ["report.csv"]);
    }

    #[test]
    fn a_set_is_written_together_or_not_at_all() {
        let d = tempfile::tempdir().unwrap();
        let (a, b) = (d.path().join("pattern.csv"), d.path().join("summary.json"));
        write_set(&[(a.clone(), b"a1".to_vec()), (b.clone(), b"b1".to_vec())]).unwrap();
        assert_eq!(listing(d.path()), ["pattern.csv", "summary.json"]);
        // The last file of the set cannot be written (its folder is missing): the first,
        // already written under its temporary name, is not renamed into place either.
        let bad = d.path().join("missing/plot.svg");
        let e = write_set(&[
            (a.clone(), b"a2".to_vec()),
            (b.clone(), b"b2".to_vec()),
            (bad.clone(), b"c2".to_vec()),
        ])
        .unwrap_err();
        assert!(chain(&e).contains(&*bad.to_string_lossy()), "{}", chain(&e));
        assert_eq!(fs::read(&a).unwrap(), b"a1", "the old set is kept");
        assert_eq!(fs::read(&b).unwrap(), b"b1");
        assert_eq!(listing(d.path()), ["pattern.csv", "summary.json"]);
        write_set(&[(a.clone(), b"a3".to_vec()), (b.clone(), b"b3".to_vec())]).unwrap();
        assert_eq!(fs::read(&a).unwrap(), b"a3");
        assert_eq!(fs::read(&b).unwrap(), b"b3");
        if let Some(m) = Mount::tmpfs("set", "size=64k") {
            let (p, q) = (m.dir.join("small.csv"), m.dir.join("large.svg"));
            write_set(&[(p.clone(), b"old".to_vec()), (q.clone(), b"old".to_vec())]).unwrap();
            let e = write_set(&[
                (p.clone(), b"new".to_vec()),
                (q.clone(), vec![b'x'; 200_000]),
            ])
            .unwrap_err();
            assert!(chain(&e).contains("large.svg"), "{}", chain(&e));
            assert!(chain(&e).contains("No space left"), "{}", chain(&e));
            assert_eq!(fs::read(&p).unwrap(), b"old");
            assert_eq!(fs::read(&q).unwrap(), b"old");
            assert_eq!(listing(&m.dir), ["large.svg", "small.csv"]);
        }
    }

    #[test]
    fn a_large_set_over_two_folders_is_written_whole_or_not_at_all() {
        // More files than threads that stage them, in two folders.
        let d = tempfile::tempdir().unwrap();
        let (x, y) = (d.path().join("x"), d.path().join("y"));
        fs::create_dir(&x).unwrap();
        fs::create_dir(&y).unwrap();
        let set: Vec<(PathBuf, Vec<u8>)> = (0..2 * MAX_SYNC_THREADS + 3)
            .map(|i| {
                let folder = if i % 2 == 0 { &x } else { &y };
                (folder.join(format!("f{i:02}")), vec![i as u8; 1000 + i])
            })
            .collect();
        write_set(&set).unwrap();
        for (path, bytes) in &set {
            assert_eq!(&fs::read(path).unwrap(), bytes, "{}", path.display());
        }
        assert_eq!(listing(&x).len() + listing(&y).len(), set.len());
        // A file in the middle cannot be written: no file of the set is replaced, and no
        // temporary file is left.
        let mut bad = set.clone();
        for (_, bytes) in &mut bad {
            bytes.push(0xff);
        }
        bad[MAX_SYNC_THREADS].0 = d.path().join("missing/f");
        let e = write_set(&bad).unwrap_err();
        assert!(chain(&e).contains("missing/f"), "{}", chain(&e));
        for (path, bytes) in &set {
            assert_eq!(&fs::read(path).unwrap(), bytes, "{}", path.display());
        }
        assert_eq!(listing(&x).len() + listing(&y).len(), set.len());
    }

    #[test]
    fn the_output_folder_is_created_and_checked() {
        let d = tempfile::tempdir().unwrap();
        let nested = d.path().join("a/b/report");
        check_output_dir(&nested).unwrap();
        assert!(nested.is_dir());
        assert!(listing(&nested).is_empty(), "the probe file is removed");
        let file = d.path().join("plain");
        fs::write(&file, b"x").unwrap();
        let e = check_output_dir(&file).unwrap_err();
        assert!(matches!(e, FileError::NotAFolder { .. }));
        assert_eq!(
            e.to_string(),
            format!("{} exists and is not a folder", file.display())
        );
        // Below a plain file: the system's "not a directory", naming the path.
        let below = file.join("below");
        let e = check_output_dir(&below).unwrap_err();
        let msg = chain(&e);
        assert!(
            msg.starts_with(&format!("checking the folder {}: ", below.display())),
            "{msg}"
        );
        if let Some(m) = Mount::tmpfs("ro", "size=64k,ro") {
            let e = check_output_dir(&m.dir).unwrap_err();
            let msg = chain(&e);
            assert!(msg.contains("writing a test file in the folder"), "{msg}");
            assert!(msg.contains("Read-only"), "{msg}");
        }
    }

    #[test]
    fn an_output_that_is_an_input_is_refused() {
        let d = tempfile::tempdir().unwrap();
        let input = d.path().join("scan.rec");
        fs::write(&input, b"data").unwrap();
        let other = d.path().join("other.rec");
        fs::write(&other, b"data").unwrap();
        let missing = d.path().join("new.csv");
        refuse_if_same_file(&missing, &[&input]).unwrap();
        refuse_if_same_file(&other, &[&input]).unwrap();
        let e = refuse_if_same_file(&input, &[&other, &input]).unwrap_err();
        assert!(matches!(&e, FileError::SameFile { input: i, .. } if *i == input));
        assert!(e.to_string().contains("choose another output"));
        let dotted = d.path().join(".").join("scan.rec");
        assert!(refuse_if_same_file(&dotted, &[&input]).is_err());
        #[cfg(unix)]
        {
            let hard = d.path().join("hard.rec");
            fs::hard_link(&input, &hard).unwrap();
            assert!(refuse_if_same_file(&hard, &[&input]).is_err());
            let soft = d.path().join("soft.rec");
            std::os::unix::fs::symlink(&input, &soft).unwrap();
            assert!(refuse_if_same_file(&soft, &[&input]).is_err());
        }
    }

    #[test]
    fn reads_are_capped_and_folders_refused() {
        let d = tempfile::tempdir().unwrap();
        let p = d.path().join("r.rec");
        fs::write(&p, [7u8; 11]).unwrap();
        assert_eq!(read_capped(&p, 11, "recording").unwrap(), [7u8; 11]);
        let e = read_capped(&p, 10, "recording").unwrap_err();
        assert_eq!(
            e.to_string(),
            format!(
                "{} is 11 bytes, over the 10 bytes limit for a recording; it was not read",
                p.display()
            )
        );
        let e = read_capped(d.path(), 10, "recording").unwrap_err();
        assert_eq!(
            e.to_string(),
            format!("{} is a folder, not a recording", d.path().display())
        );
        let e = read_capped(&d.path().join("none"), 10, "recording").unwrap_err();
        assert!(chain(&e).starts_with("reading "), "{}", chain(&e));
        // A device (a pipe alike) is not opened: opening a pipe would wait for a writer.
        #[cfg(unix)]
        {
            let e = read_capped(Path::new("/dev/zero"), 10, "recording").unwrap_err();
            assert_eq!(
                e.to_string(),
                "/dev/zero is not a regular file (a device, a pipe or a socket), not a \
                 recording; it was not read"
            );
        }
        assert_eq!(size_text(1 << 30), "1 GiB");
        assert_eq!(size_text(3 << 20), "3 MiB");
        assert_eq!(size_text(1000), "1000 bytes");
    }
}
