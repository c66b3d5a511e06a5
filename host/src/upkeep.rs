//! What becomes of a recording's closed logs: gzip-compressed
//! (`record --compress`), removed once older than some days
//! (`--keep-days`), and removed oldest first while the disk's free space is
//! under a floor (`--free-floor-mb`). One thread does all of it, so a port
//! never waits on a slow disk and two ports never race over one file.
//!
//! Only logs this recorder has written are touched: files named
//! `NAME-YYYYMMDDHHMMSS(-N).gleanlog` (or `.gleanlog.gz`) for a `NAME` one of
//! its ports records to, and never a log still being written. Another
//! recorder's logs in the same folder, and every other file, are left alone.

use std::collections::BTreeSet;
use std::io::Write;
use std::path::{Path, PathBuf};
use std::sync::mpsc::{self, RecvTimeoutError, Sender};
use std::time::{Duration, SystemTime};

use anyhow::{Context, Result};

/// The extension of a log.
pub const LOG_EXTENSION: &str = "gleanlog";
/// What a compressed log's name adds to the log's.
pub const COMPRESSED_SUFFIX: &str = ".gz";
/// How often the closed logs are looked over when nothing else happens.
pub const TIDY_EVERY: Duration = Duration::from_secs(10);

/// What to do with closed logs; everything is off by default.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct Policy {
    /// Gzip each closed log (`X.gleanlog` becomes `X.gleanlog.gz`).
    pub compress: bool,
    /// Remove closed logs last written longer ago than this.
    pub keep_for: Option<Duration>,
    /// Remove the oldest closed logs while the folder's file system has less
    /// free space than this, bytes.
    pub free_floor_bytes: Option<u64>,
}

impl Policy {
    /// True when there is nothing to do.
    pub fn is_idle(&self) -> bool {
        *self == Policy::default()
    }
}

/// What a port tells the upkeep thread.
#[derive(Debug)]
enum Job {
    /// A log is being written: leave it alone, and look after the logs of its name.
    Opened(PathBuf),
    /// A log is complete.
    Closed(PathBuf),
}

/// A port's handle on the upkeep thread; cheap to clone.
#[derive(Debug, Clone)]
pub struct Upkeep {
    jobs: Option<Sender<Job>>,
}

impl Upkeep {
    /// A handle that does nothing (the policy asks for nothing).
    pub fn none() -> Self {
        Upkeep { jobs: None }
    }

    /// Starts the upkeep thread in `scope` for logs in `dir`; it ends when
    /// every handle is dropped.
    pub fn start<'scope>(
        scope: &'scope std::thread::Scope<'scope, '_>,
        dir: PathBuf,
        policy: Policy,
    ) -> Self {
        if policy.is_idle() {
            return Upkeep::none();
        }
        let (jobs, receive) = mpsc::channel();
        scope.spawn(move || {
            let mut shelf = Shelf::new(dir, policy);
            loop {
                match receive.recv_timeout(TIDY_EVERY) {
                    Ok(Job::Opened(path)) => shelf.opened(path),
                    Ok(Job::Closed(path)) => {
                        shelf.open.remove(&path);
                    }
                    Err(RecvTimeoutError::Timeout) => {}
                    Err(RecvTimeoutError::Disconnected) => return,
                }
                shelf.tidy(SystemTime::now());
            }
        });
        Upkeep { jobs: Some(jobs) }
    }

    /// `path` is being written.
    pub fn opened(&self, path: &Path) {
        self.send(Job::Opened(path.to_path_buf()));
    }

    /// `path` is complete (nothing more will be written to it).
    pub fn closed(&self, path: &Path) {
        self.send(Job::Closed(path.to_path_buf()));
    }

    fn send(&self, job: Job) {
        if let Some(jobs) = &self.jobs {
            // The thread ends only when every handle is gone.
            let _ = jobs.send(job);
        }
    }
}

/// How the free space of a folder's file system is found, bytes.
type FreeSpace = Box<dyn FnMut(&Path) -> std::io::Result<u64> + Send>;

/// The recorder's logs in one folder, and what to do with the closed ones.
pub struct Shelf {
    dir: PathBuf,
    policy: Policy,
    /// Names (`NAME` of `NAME-stamp.gleanlog`) this recorder writes to.
    names: BTreeSet<String>,
    /// Logs being written.
    open: BTreeSet<PathBuf>,
    /// Said that the floor cannot be kept, until it can again.
    said_floor_unreachable: bool,
    free_space: FreeSpace,
}

impl std::fmt::Debug for Shelf {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("Shelf")
            .field("dir", &self.dir)
            .field("policy", &self.policy)
            .field("open", &self.open)
            .finish_non_exhaustive()
    }
}

/// One closed log found in the folder.
#[derive(Debug, Clone)]
struct Closed {
    path: PathBuf,
    written: SystemTime,
    compressed: bool,
}

impl Shelf {
    /// Logs in `dir` looked after by `policy`; no names yet.
    pub fn new(dir: PathBuf, policy: Policy) -> Self {
        Shelf {
            dir,
            policy,
            names: BTreeSet::new(),
            open: BTreeSet::new(),
            said_floor_unreachable: false,
            free_space: Box::new(|dir| fs4::available_space(dir)),
        }
    }

    /// `path` is being written; logs of its name are looked after from now on.
    pub fn opened(&mut self, path: PathBuf) {
        if let Some(name) = path
            .file_name()
            .and_then(|f| f.to_str())
            .and_then(log_name_of)
        {
            self.names.insert(name.to_owned());
        }
        self.open.insert(path);
    }

    /// Applies the policy now; says on stderr what it removed or compressed
    /// and what failed (recording goes on either way).
    pub fn tidy(&mut self, now: SystemTime) {
        let closed = match self.closed_logs() {
            Ok(closed) => closed,
            Err(e) => {
                eprintln!("warning: old logs not looked after: {e:#}");
                return;
            }
        };
        let mut kept = Vec::new();
        for log in closed {
            let age = now.duration_since(log.written).unwrap_or_default();
            if self.policy.keep_for.is_some_and(|keep| age > keep) {
                self.remove(&log.path, "older than --keep-days");
            } else {
                kept.push(log);
            }
        }
        if self.policy.compress {
            for log in kept.iter_mut().filter(|l| !l.compressed) {
                match compress(&log.path) {
                    Ok(gz) => log.path = gz,
                    Err(e) => eprintln!("warning: {} not compressed: {e:#}", log.path.display()),
                }
            }
        }
        if let Some(floor) = self.policy.free_floor_bytes {
            self.keep_floor(floor, kept);
        }
    }

    /// Removes the oldest of `closed` while free space is under `floor`.
    fn keep_floor(&mut self, floor: u64, mut closed: Vec<Closed>) {
        closed.sort_by_key(|l| std::cmp::Reverse(l.written));
        loop {
            let free = match (self.free_space)(&self.dir) {
                Ok(free) => free,
                Err(e) => {
                    eprintln!("warning: free space of {} unknown: {e}", self.dir.display());
                    return;
                }
            };
            if free >= floor {
                self.said_floor_unreachable = false;
                return;
            }
            let Some(oldest) = closed.pop() else {
                if !self.said_floor_unreachable {
                    self.said_floor_unreachable = true;
                    eprintln!(
                        "warning: {} has {} MB free, under the floor of {} MB, and no closed log is left to remove",
                        self.dir.display(),
                        free / BYTES_PER_MB,
                        floor / BYTES_PER_MB
                    );
                }
                return;
            };
            self.remove(&oldest.path, "free space under --free-floor-mb");
        }
    }

    fn remove(&self, path: &Path, why: &str) {
        match std::fs::remove_file(path) {
            Ok(()) => eprintln!("removed {} ({why})", path.display()),
            Err(e) if e.kind() == std::io::ErrorKind::NotFound => {}
            Err(e) => eprintln!("warning: {} not removed: {e}", path.display()),
        }
    }

    /// The closed logs of this recorder's names in the folder.
    fn closed_logs(&self) -> Result<Vec<Closed>> {
        let listing = std::fs::read_dir(&self.dir)
            .with_context(|| format!("cannot list {}", self.dir.display()))?;
        let mut found = Vec::new();
        for entry in listing {
            let entry = entry?;
            let path = entry.path();
            let Some(file) = path.file_name().and_then(|f| f.to_str()) else {
                continue;
            };
            let ours = log_name_of(file).is_some_and(|name| self.names.contains(name));
            if !ours || self.open.contains(&path) {
                continue;
            }
            let Ok(written) = entry.metadata().and_then(|m| m.modified()) else {
                continue; // gone meanwhile
            };
            found.push(Closed {
                compressed: file.ends_with(COMPRESSED_SUFFIX),
                path,
                written,
            });
        }
        Ok(found)
    }
}

/// Bytes in the megabyte of `--free-floor-mb`.
pub const BYTES_PER_MB: u64 = 1_000_000;

/// The `NAME` of a file name the recorder gives its logs,
/// `NAME-YYYYMMDDHHMMSS(-N).gleanlog(.gz)`; `None` for any other name.
pub fn log_name_of(file: &str) -> Option<&str> {
    let file = file.strip_suffix(COMPRESSED_SUFFIX).unwrap_or(file);
    let stem = file.strip_suffix(LOG_EXTENSION)?.strip_suffix('.')?;
    let is_number = |s: &str| !s.is_empty() && s.bytes().all(|b| b.is_ascii_digit());
    let is_stamp = |s: &str| s.len() == 14 && is_number(s);
    let (rest, last) = stem.rsplit_once('-')?;
    if is_stamp(last) {
        return Some(rest).filter(|r| !r.is_empty());
    }
    let (name, stamp) = rest.rsplit_once('-')?;
    (is_number(last) && is_stamp(stamp) && !name.is_empty()).then_some(name)
}

/// Gzips the log at `path` into `path.gz` (complete or not at all, with the
/// log's time of last writing), then removes the log; returns the new path.
pub fn compress(path: &Path) -> Result<PathBuf> {
    let mut gz_name = path.as_os_str().to_owned();
    gz_name.push(COMPRESSED_SUFFIX);
    let gz = PathBuf::from(gz_name);
    let mut input =
        std::fs::File::open(path).with_context(|| format!("cannot open {}", path.display()))?;
    let written = input.metadata().and_then(|m| m.modified()).ok();
    let out = crate::files::AtomicFile::create(&gz)?;
    let mut encoder = flate2::write::GzEncoder::new(out, flate2::Compression::default());
    std::io::copy(&mut input, &mut encoder)
        .with_context(|| format!("cannot compress {}", path.display()))?;
    let mut out = encoder.finish()?;
    out.flush()?;
    if let Some(written) = written {
        out.set_modified(written)?;
    }
    out.commit()?;
    std::fs::remove_file(path).with_context(|| format!("cannot remove {}", path.display()))?;
    Ok(gz)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn names_the_recorder_gives() {
        assert_eq!(
            log_name_of("ttyACM0-20261101000000.gleanlog"),
            Some("ttyACM0")
        );
        assert_eq!(
            log_name_of("ttyACM0-20261101000000-2.gleanlog"),
            Some("ttyACM0")
        );
        assert_eq!(
            log_name_of("usb-Acme_1-if00-20261101000000.gleanlog.gz"),
            Some("usb-Acme_1-if00")
        );
        assert_eq!(log_name_of("ttyACM0-notes.gleanlog"), None);
        assert_eq!(log_name_of("ttyACM0-20261101000000.gleanlog.bak"), None);
        assert_eq!(log_name_of("-20261101000000.gleanlog"), None);
        assert_eq!(log_name_of("readme.txt"), None);
    }

    fn make(dir: &Path, name: &str, age: Duration) -> PathBuf {
        let path = dir.join(name);
        std::fs::write(&path, name.repeat(50)).unwrap();
        let file = std::fs::File::options().write(true).open(&path).unwrap();
        file.set_modified(SystemTime::now() - age).unwrap();
        path
    }

    #[test]
    fn only_closed_logs_of_its_own_names_go() {
        let dir = tempfile::tempdir().unwrap();
        let day = Duration::from_secs(86_400);
        let week = 7 * day;
        let gone = [
            make(dir.path(), "ttyACM0-20261101000000-2.gleanlog", week),
            make(dir.path(), "ttyACM0-20261101000000.gleanlog", week),
            make(dir.path(), "ttyACM1-20261101000000.gleanlog.gz", week), // another port of ours
        ];
        let open = make(dir.path(), "ttyACM0-20261102000000.gleanlog", week);
        let kept = [
            make(
                dir.path(),
                "ttyACM0-20261202000000.gleanlog",
                Duration::ZERO,
            ),
            open.clone(),
            make(dir.path(), "ttyUSB9-20261101000000.gleanlog", week), // not recorded here
            make(dir.path(), "ttyACM0-notes.gleanlog", week),
            make(dir.path(), "ttyACM0-20261101000000.gleanlog.bak", week),
            make(dir.path(), "readme.txt", week),
        ];
        let policy = Policy {
            keep_for: Some(day),
            ..Policy::default()
        };
        let mut shelf = Shelf::new(dir.path().to_path_buf(), policy);
        shelf.opened(open);
        shelf.opened(dir.path().join("ttyACM1-20261203000000.gleanlog"));
        shelf.tidy(SystemTime::now());
        assert!(gone.iter().all(|p| !p.exists()));
        assert!(kept.iter().all(|p| p.exists()));
    }

    #[test]
    fn compressed_logs_read_back_the_same_and_keep_their_age() {
        let dir = tempfile::tempdir().unwrap();
        let two_days = Duration::from_secs(2 * 86_400);
        let closed = make(dir.path(), "node-20261101000000.gleanlog", two_days);
        let open = make(dir.path(), "node-20261103000000.gleanlog", Duration::ZERO);
        let before = std::fs::read(&closed).unwrap();
        let policy = Policy {
            compress: true,
            ..Policy::default()
        };
        let mut shelf = Shelf::new(dir.path().to_path_buf(), policy);
        shelf.opened(open.clone());
        shelf.tidy(SystemTime::now());
        let gz = dir.path().join("node-20261101000000.gleanlog.gz");
        assert!(!closed.exists() && open.exists());
        let mut after = Vec::new();
        std::io::Read::read_to_end(
            &mut flate2::read::GzDecoder::new(std::fs::File::open(&gz).unwrap()),
            &mut after,
        )
        .unwrap();
        assert_eq!(after, before);
        let age = SystemTime::now()
            .duration_since(std::fs::metadata(&gz).unwrap().modified().unwrap())
            .unwrap();
        assert!(age > two_days - Duration::from_secs(60), "age {age:?}");
        // Nothing is left half made, and a second pass changes nothing.
        shelf.tidy(SystemTime::now());
        let mut names: Vec<_> = std::fs::read_dir(dir.path())
            .unwrap()
            .map(|e| e.unwrap().file_name().into_string().unwrap())
            .collect();
        names.sort();
        assert_eq!(
            names,
            [
                "node-20261101000000.gleanlog.gz",
                "node-20261103000000.gleanlog"
            ]
        );
    }

    #[test]
    fn under_the_floor_the_oldest_closed_logs_go_first() {
        let dir = tempfile::tempdir().unwrap();
        let hour = Duration::from_secs(3600);
        let oldest = make(dir.path(), "node-20261101000000.gleanlog", 3 * hour);
        let older = make(dir.path(), "node-20261101010000.gleanlog", 2 * hour);
        let newest = make(dir.path(), "node-20261101020000.gleanlog", hour);
        let size = std::fs::metadata(&oldest).unwrap().len();
        let policy = Policy {
            free_floor_bytes: Some(2 * size),
            ..Policy::default()
        };
        let mut shelf = Shelf::new(dir.path().to_path_buf(), policy);
        // The disk is full but for what removing these logs frees.
        let watched = [oldest.clone(), older.clone(), newest.clone()];
        shelf.free_space =
            Box::new(move |_| Ok(watched.iter().filter(|p| !p.exists()).count() as u64 * size));
        shelf.opened(dir.path().join("node-20261101030000.gleanlog"));
        shelf.tidy(SystemTime::now());
        assert!(!oldest.exists() && !older.exists() && newest.exists());
        assert!(!shelf.said_floor_unreachable);
    }

    #[test]
    fn an_unreachable_floor_removes_every_closed_log_and_never_the_open_one() {
        let dir = tempfile::tempdir().unwrap();
        let hour = Duration::from_secs(3600);
        let older = make(dir.path(), "node-20261101000000.gleanlog", 3 * hour);
        let newer = make(dir.path(), "node-20261101010000.gleanlog", 2 * hour);
        let open = make(dir.path(), "node-20261101020000.gleanlog", hour);
        // No disk has this much free space, so every closed log goes.
        let policy = Policy {
            free_floor_bytes: Some(u64::MAX),
            ..Policy::default()
        };
        let mut shelf = Shelf::new(dir.path().to_path_buf(), policy);
        shelf.opened(open.clone());
        shelf.tidy(SystemTime::now());
        assert!(!older.exists() && !newer.exists() && open.exists());
        assert!(shelf.said_floor_unreachable);
        // A floor already met removes nothing.
        let closed = make(dir.path(), "node-20261101030000.gleanlog", hour);
        shelf.policy.free_floor_bytes = Some(0);
        shelf.tidy(SystemTime::now());
        assert!(closed.exists() && !shelf.said_floor_unreachable);
    }
}
