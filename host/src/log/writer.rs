//! Appending records. Every record is handed to the operating system when
//! [`LogWriter::flush`] is called (the recorder does so after each read from
//! the port, so a crash of the program loses nothing already received) and
//! forced to the disk by [`LogWriter::sync`] (once a second and at the end,
//! so a power cut loses at most the last second).

use std::fs::{File, OpenOptions};
use std::io::{Seek, SeekFrom, Write};
use std::path::{Path, PathBuf};

use anyhow::{Context, Result};
use gleaner_protocol::frame_crc;

use super::format::{
    LogHeader, MarkerKind, KIND_FRAME, KIND_HEADER, KIND_MARKER, MAGIC, MAX_BODY_LEN,
    RECORD_PREFIX_LEN,
};
use crate::analysis::checkpoint::{Keeper, CHECKPOINT_EVERY_BYTES};

/// Records gathered before they are handed to the operating system anyway.
const PENDING_LIMIT: usize = 64 * 1024;

/// Where a log is written: appended to, cut back to its last whole record
/// after a write that failed part-way, and forced to the disk.
pub trait LogStore: Write {
    /// Cuts the store back to `len` bytes and goes on writing there.
    fn truncate_to(&mut self, len: u64) -> std::io::Result<()>;
    /// Forces what was written to the disk.
    fn sync(&mut self) -> std::io::Result<()>;
}

impl LogStore for File {
    fn truncate_to(&mut self, len: u64) -> std::io::Result<()> {
        self.set_len(len)?;
        self.seek(SeekFrom::Start(len)).map(|_| ())
    }
    fn sync(&mut self) -> std::io::Result<()> {
        self.sync_data()
    }
}

impl LogStore for Vec<u8> {
    fn truncate_to(&mut self, len: u64) -> std::io::Result<()> {
        self.truncate(usize::try_from(len).unwrap_or(usize::MAX));
        Ok(())
    }
    fn sync(&mut self) -> std::io::Result<()> {
        Ok(())
    }
}

/// Follows every record a writer appends, and may have records of its own
/// appended after one: the analysis checkpoints ([`Keeper`]).
pub trait Follower: Send {
    /// Sees one record as it goes into the file: length, CRC and body.
    fn follow(&mut self, record: &[u8]);
    /// Records due now: their kind, host time and payloads.
    fn due(&mut self) -> Option<(u8, u64, Vec<Vec<u8>>)>;
}

/// The disk (or the user's quota) holding a log is full: what was handed to
/// the operating system before is intact.
#[derive(Debug, thiserror::Error)]
#[error("the disk holding {} is full", path.display())]
pub struct DiskFull {
    /// The log.
    pub path: PathBuf,
}

/// An open log being appended to (a file, or any store for tests and tools).
pub struct LogWriter<W: Write = File> {
    out: W,
    path: PathBuf,
    scratch: Vec<u8>,
    /// Whole records not handed to the operating system yet.
    pending: Vec<u8>,
    bytes: u64,
    records: u64,
    /// Bytes and records handed over whole: the store holds exactly these.
    kept_bytes: u64,
    kept_records: u64,
    /// Follows what is written (none after a write failed part-way).
    follower: Option<Box<dyn Follower>>,
}

fn explain(err: std::io::Error, path: &Path) -> anyhow::Error {
    use std::io::ErrorKind;
    if matches!(
        err.kind(),
        ErrorKind::StorageFull | ErrorKind::QuotaExceeded
    ) {
        anyhow::Error::new(DiskFull {
            path: path.to_path_buf(),
        })
    } else {
        anyhow::Error::new(err).context(format!("cannot write to {}", path.display()))
    }
}

impl LogWriter<File> {
    /// Creates a new log (never overwrites an existing file) and writes its header.
    pub fn create(path: &Path, header: &LogHeader) -> Result<Self> {
        if let Some(dir) = path.parent().filter(|d| !d.as_os_str().is_empty()) {
            std::fs::create_dir_all(dir)
                .with_context(|| format!("cannot create folder {}", dir.display()))?;
        }
        let file = OpenOptions::new()
            .write(true)
            .create_new(true)
            .open(path)
            .with_context(|| {
                format!(
                    "cannot create log {} (an existing file is never overwritten)",
                    path.display()
                )
            })?;
        LogWriter::to_writer(file, path, header)
    }
}

impl LogWriter<File> {
    /// Opens an existing log to go on writing at its end (a node's own log,
    /// picked up again). Refused unless the file starts with a header and
    /// reads whole to its end, so nothing is ever appended after damage.
    pub fn append_to(path: &Path) -> Result<Self> {
        let refuse = |why: &str| anyhow::anyhow!("not going on in {}: {why}", path.display());
        let file =
            File::open(path).with_context(|| format!("cannot open log {}", path.display()))?;
        let len = file.metadata()?.len();
        let mut reader = super::LogReader::new(file);
        let mut records = 0u64;
        let mut starts_with_header = false;
        for record in reader.by_ref() {
            if records == 0 {
                starts_with_header = matches!(record.body, super::RecordBody::Header(_));
            }
            records += 1;
        }
        if !starts_with_header {
            return Err(refuse("it is not a log"));
        }
        if !reader.warnings().is_empty() || reader.offset() != len {
            return Err(refuse("it does not read whole to its end"));
        }
        let mut out = OpenOptions::new()
            .write(true)
            .open(path)
            .with_context(|| format!("cannot open log {}", path.display()))?;
        out.seek(SeekFrom::End(0))?;
        Ok(LogWriter {
            out,
            path: path.to_path_buf(),
            scratch: Vec::new(),
            pending: Vec::new(),
            bytes: len,
            records,
            kept_bytes: len,
            kept_records: records,
            follower: Keeper::picking_up(path, len, CHECKPOINT_EVERY_BYTES)
                .map(|k| Box::new(k) as Box<dyn Follower>),
        })
    }
}

impl LogWriter<Vec<u8>> {
    /// The bytes written since the last call, the writer going on: for a log
    /// generated in memory and streamed.
    pub fn take_written(&mut self) -> Result<Vec<u8>> {
        self.flush()?;
        Ok(std::mem::take(&mut self.out))
    }
}

impl<W: LogStore> LogWriter<W> {
    /// Flushes and forces the data to the disk.
    pub fn sync(&mut self) -> Result<()> {
        self.flush()?;
        let path = self.path.clone();
        self.out.sync().map_err(|e| explain(e, &path))
    }

    /// After a failed write: forgets the records not handed over whole and
    /// cuts the store back to the last whole record, so the log stays
    /// readable to its end. Returns the records given up.
    pub fn roll_back(&mut self) -> Result<u64> {
        let given_up = self.records.saturating_sub(self.kept_records);
        // What the follower saw is no longer what the file holds.
        self.follower = None;
        self.pending.clear();
        self.bytes = self.kept_bytes;
        self.records = self.kept_records;
        let path = self.path.clone();
        self.out.truncate_to(self.kept_bytes).with_context(|| {
            format!(
                "cannot cut {} back to its last whole record",
                path.display()
            )
        })?;
        Ok(given_up)
    }
}

impl<W: Write> LogWriter<W> {
    /// Starts a log on any writer; `path` only names it in messages.
    pub fn to_writer(out: W, path: &Path, header: &LogHeader) -> Result<Self> {
        let mut writer = LogWriter {
            out,
            path: path.to_path_buf(),
            scratch: Vec::new(),
            pending: MAGIC.to_vec(),
            bytes: MAGIC.len() as u64,
            records: 0,
            kept_bytes: 0,
            kept_records: 0,
            follower: Some(Box::new(Keeper::new())),
        };
        let json = serde_json::to_vec(header)?;
        writer.append(KIND_HEADER, super::now_us(), &[&json])?;
        writer.flush()?;
        Ok(writer)
    }

    /// The underlying writer, flushed.
    pub fn into_inner(mut self) -> Result<W> {
        self.flush().context("cannot flush the log")?;
        Ok(self.out)
    }

    fn append(&mut self, kind: u8, host_time_us: u64, parts: &[&[u8]]) -> Result<()> {
        self.scratch.clear();
        self.scratch.push(kind);
        self.scratch.extend_from_slice(&host_time_us.to_le_bytes());
        for part in parts {
            self.scratch.extend_from_slice(part);
        }
        let len = self.scratch.len().min(MAX_BODY_LEN);
        self.scratch.truncate(len);
        let crc = frame_crc(&self.scratch);
        let at = self.pending.len();
        self.pending.extend_from_slice(&(len as u32).to_le_bytes());
        self.pending.extend_from_slice(&crc.to_le_bytes());
        self.pending.extend_from_slice(&self.scratch);
        if let Some(follower) = self.follower.as_mut() {
            follower.follow(&self.pending[at..]);
        }
        self.bytes += (RECORD_PREFIX_LEN + len) as u64;
        self.records += 1;
        if self.pending.len() >= PENDING_LIMIT {
            self.flush()?;
        }
        Ok(())
    }

    /// Appends what the follower has due (a checkpoint), if anything.
    fn append_due(&mut self) -> Result<()> {
        let Some((kind, host_time_us, payloads)) = self.follower.as_mut().and_then(|f| f.due())
        else {
            return Ok(());
        };
        for payload in payloads {
            self.append(kind, host_time_us, &[&payload])?;
        }
        Ok(())
    }

    /// Follows what is written with `follower` instead (none: nothing
    /// follows, so the log gets no checkpoints).
    pub fn follow_with(&mut self, follower: Option<Box<dyn Follower>>) {
        self.follower = follower;
    }

    /// Appends a received frame (without its delimiter).
    pub fn append_frame(&mut self, host_time_us: u64, frame: &[u8]) -> Result<()> {
        self.append(KIND_FRAME, host_time_us, &[frame])?;
        self.append_due()
    }

    /// Appends a marker.
    pub fn append_marker(
        &mut self,
        host_time_us: u64,
        kind: MarkerKind,
        detail: &str,
    ) -> Result<()> {
        self.append(
            KIND_MARKER,
            host_time_us,
            &[&[kind.code()], detail.as_bytes()],
        )?;
        self.append_due()
    }

    /// Hands buffered records to the operating system.
    pub fn flush(&mut self) -> Result<()> {
        let path = self.path.clone();
        self.out
            .write_all(&self.pending)
            .and_then(|()| self.out.flush())
            .map_err(|e| explain(e, &path))?;
        self.pending.clear();
        self.kept_bytes = self.bytes;
        self.kept_records = self.records;
        Ok(())
    }

    /// The log's path (or name).
    pub fn path(&self) -> &Path {
        &self.path
    }

    /// Bytes written so far.
    pub fn bytes_written(&self) -> u64 {
        self.bytes
    }

    /// Records written so far.
    pub fn records_written(&self) -> u64 {
        self.records
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::log::{LogReader, RecordBody};

    fn header() -> LogHeader {
        crate::recorder::header_for("test")
    }

    fn frames_in(path: &Path) -> (Vec<Vec<u8>>, usize) {
        let mut reader = LogReader::new(File::open(path).unwrap());
        let frames = reader
            .by_ref()
            .filter_map(|r| match r.body {
                RecordBody::Frame(f) => Some(f),
                _ => None,
            })
            .collect();
        (frames, reader.warnings().len())
    }

    #[test]
    fn a_whole_log_is_gone_on_in_at_its_end() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("node.gleanlog");
        let mut first = LogWriter::create(&path, &header()).unwrap();
        first.append_frame(1, b"one").unwrap();
        first.append_frame(2, b"two").unwrap();
        first.sync().unwrap();
        drop(first);
        let mut again = LogWriter::append_to(&path).unwrap();
        assert_eq!(again.records_written(), 3, "the header and two frames");
        again.append_frame(3, b"three").unwrap();
        again.sync().unwrap();
        let (frames, warnings) = frames_in(&path);
        assert_eq!(frames, [&b"one"[..], b"two", b"three"]);
        assert_eq!(warnings, 0);
    }

    #[test]
    fn a_torn_or_foreign_file_is_never_appended_to() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("node.gleanlog");
        let mut first = LogWriter::create(&path, &header()).unwrap();
        first.append_frame(1, b"one").unwrap();
        first.sync().unwrap();
        drop(first);
        let whole = std::fs::read(&path).unwrap();
        std::fs::write(&path, &whole[..whole.len() - 2]).unwrap();
        let err = LogWriter::append_to(&path).err().unwrap();
        assert!(format!("{err}").contains("does not read whole"), "{err}");
        assert_eq!(
            std::fs::read(&path).unwrap().len(),
            whole.len() - 2,
            "untouched"
        );
        let notes = dir.path().join("notes.txt");
        std::fs::write(&notes, "not a log at all").unwrap();
        let err = LogWriter::append_to(&notes).err().unwrap();
        assert!(format!("{err}").contains("not a log"), "{err}");
    }
}
