//! Files all or nothing: every output is written to a temporary sibling (a file, or a whole
//! folder for the report bundle) and renamed into place only when complete. Temporaries in
//! flight are registered so that an interrupted run (SIGINT/SIGTERM, handled by the command
//! line) can remove them with [`remove_pending`].

use std::io::Write as _;
use std::path::{Path, PathBuf};
use std::sync::Mutex;
use std::sync::atomic::{AtomicU64, Ordering};

/// Temporaries being written, removed by [`remove_pending`].
static PENDING: Mutex<Vec<PathBuf>> = Mutex::new(Vec::new());
/// Distinguishes the temporaries of one process.
static SERIAL: AtomicU64 = AtomicU64::new(0);

/// Remove every temporary file or folder still being written (for a signal handler: it takes
/// the lock without waiting, so a writer holding it cannot block the exit).
pub fn remove_pending() {
    let Ok(list) = PENDING.try_lock() else {
        return;
    };
    for p in list.iter() {
        if p.is_dir() {
            let _ = std::fs::remove_dir_all(p);
        } else {
            let _ = std::fs::remove_file(p);
        }
    }
}

/// A registered temporary path: unregistered (and removed, unless kept) when dropped.
struct Temporary {
    path: PathBuf,
    keep: bool,
}

impl Temporary {
    fn new(path: PathBuf) -> Temporary {
        if let Ok(mut list) = PENDING.lock() {
            list.push(path.clone());
        }
        Temporary { path, keep: false }
    }
}

impl Drop for Temporary {
    fn drop(&mut self) {
        if let Ok(mut list) = PENDING.lock() {
            list.retain(|p| p != &self.path);
        }
        if !self.keep {
            if self.path.is_dir() {
                let _ = std::fs::remove_dir_all(&self.path);
            } else {
                let _ = std::fs::remove_file(&self.path);
            }
        }
    }
}

/// A hidden sibling name for `path`: `.NAME.PID.N.tmp`.
fn sibling(path: &Path, tag: &str) -> (PathBuf, PathBuf) {
    let dir = path
        .parent()
        .filter(|d| !d.as_os_str().is_empty())
        .unwrap_or(Path::new("."))
        .to_path_buf();
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| "out".into());
    let n = SERIAL.fetch_add(1, Ordering::Relaxed);
    let tmp = dir.join(format!(".{name}.{}.{n}.{tag}", std::process::id()));
    (dir, tmp)
}

/// Write bytes to `path` via a temporary sibling and a rename, so no half-written file remains.
pub fn write_atomic(path: &Path, bytes: &[u8]) -> std::io::Result<()> {
    write_atomic_with(path, &mut |w| w.write_all(bytes))
}

/// Stream into a temporary sibling of `path`, then rename it into place; the temporary file
/// is removed when anything fails (or the run is interrupted).
pub fn write_atomic_with(
    path: &Path,
    fill: &mut dyn FnMut(&mut dyn std::io::Write) -> std::io::Result<()>,
) -> std::io::Result<()> {
    let (_, tmp_path) = sibling(path, "tmp");
    let mut tmp = Temporary::new(tmp_path);
    let f = std::fs::File::create(&tmp.path)?;
    let mut w = std::io::BufWriter::with_capacity(1 << 20, f);
    fill(&mut w)?;
    let f = w.into_inner().map_err(|e| e.into_error())?;
    f.sync_all()?;
    std::fs::rename(&tmp.path, path)?;
    tmp.keep = true;
    Ok(())
}

/// Tries at putting a bundle in place while concurrent runs move the target.
const COMMIT_TRIES: usize = 64;

/// A folder written whole: files go into a temporary sibling folder, and [`commit`] puts it in
/// place of the target in one rename (a previous target is moved aside first and removed
/// after), so readers and concurrent runs only ever see a complete bundle.
///
/// [`commit`]: AtomicDir::commit
pub struct AtomicDir {
    target: PathBuf,
    tmp: Temporary,
}

impl AtomicDir {
    /// Start a folder that will replace `target`.
    pub fn new(target: &Path) -> std::io::Result<AtomicDir> {
        let (parent, tmp_path) = sibling(target, "tmp.d");
        std::fs::create_dir_all(&parent)?;
        let tmp = Temporary::new(tmp_path);
        std::fs::create_dir(&tmp.path)?;
        Ok(AtomicDir {
            target: target.to_path_buf(),
            tmp,
        })
    }

    /// Where a file of the folder is written now.
    pub fn path(&self, name: &str) -> PathBuf {
        self.tmp.path.join(name)
    }

    /// Where it will be once committed.
    pub fn final_path(&self, name: &str) -> PathBuf {
        self.target.join(name)
    }

    /// Write one file of the folder.
    pub fn write(&self, name: &str, bytes: &[u8]) -> std::io::Result<PathBuf> {
        let mut f = std::fs::File::create(self.path(name))?;
        f.write_all(bytes)?;
        f.sync_all()?;
        Ok(self.final_path(name))
    }

    /// Put the folder in place of the target. A rename over a non-empty folder fails, so an
    /// existing target (or one a concurrent run just put there) is first renamed aside; a
    /// bounded number of tries, then an error.
    pub fn commit(mut self) -> std::io::Result<()> {
        let mut last = None;
        for _ in 0..COMMIT_TRIES {
            match std::fs::rename(&self.tmp.path, &self.target) {
                Ok(()) => {
                    self.tmp.keep = true;
                    return Ok(());
                }
                Err(e) => {
                    match std::fs::symlink_metadata(&self.target) {
                        Ok(m) if !m.is_dir() => {
                            return Err(std::io::Error::other(format!(
                                "{} exists and is not a folder",
                                self.target.display()
                            )));
                        }
                        Ok(_) => {
                            let (_, old) = sibling(&self.target, "old.d");
                            let aside = Temporary::new(old);
                            // Another run may have moved it already: then simply try again.
                            let _ = std::fs::rename(&self.target, &aside.path);
                        }
                        // Gone (a concurrent run moved it aside) or unreachable: try again;
                        // a lasting cause returns its own error below.
                        Err(_) => {}
                    }
                    last = Some(e);
                }
            }
        }
        Err(last.unwrap_or_else(|| {
            std::io::Error::other(format!(
                "{} kept changing under concurrent runs; the bundle was not written",
                self.target.display()
            ))
        }))
    }
}
