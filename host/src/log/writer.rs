//! Appending records. Every record is handed to the operating system when
//! [`LogWriter::flush`] is called (the recorder does so after each read from
//! the port, so a crash of the program loses nothing already received) and
//! forced to the disk by [`LogWriter::sync`] (once a second and at the end,
//! so a power cut loses at most the last second).

use std::fs::{File, OpenOptions};
use std::io::{BufWriter, Write};
use std::path::{Path, PathBuf};

use anyhow::{Context, Result};
use gleaner_protocol::frame_crc;

use super::format::{
    LogHeader, MarkerKind, KIND_FRAME, KIND_HEADER, KIND_MARKER, MAGIC, MAX_BODY_LEN,
};

/// An open log being appended to (a file, or any writer for tests and tools).
pub struct LogWriter<W: Write = File> {
    file: BufWriter<W>,
    path: PathBuf,
    scratch: Vec<u8>,
    bytes: u64,
    records: u64,
}

fn explain(err: std::io::Error, path: &Path) -> anyhow::Error {
    if err.raw_os_error() == Some(28) {
        anyhow::anyhow!(
            "the disk holding {} is full: recording stopped. Every record written before this one is intact; free some space and start a new recording",
            path.display()
        )
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

    /// Flushes and forces the data to the disk.
    pub fn sync(&mut self) -> Result<()> {
        self.flush()?;
        let path = self.path.clone();
        self.file
            .get_ref()
            .sync_data()
            .map_err(|e| explain(e, &path))
    }
}

impl<W: Write> LogWriter<W> {
    /// Starts a log on any writer; `path` only names it in messages.
    pub fn to_writer(out: W, path: &Path, header: &LogHeader) -> Result<Self> {
        let mut writer = LogWriter {
            file: BufWriter::new(out),
            path: path.to_path_buf(),
            scratch: Vec::new(),
            bytes: 0,
            records: 0,
        };
        writer.file.write_all(MAGIC).map_err(|e| explain(e, path))?;
        writer.bytes += MAGIC.len() as u64;
        let json = serde_json::to_vec(header)?;
        writer.append(KIND_HEADER, super::now_us(), &[&json])?;
        writer.flush()?;
        Ok(writer)
    }

    /// The underlying writer, flushed.
    pub fn into_inner(self) -> Result<W> {
        self.file
            .into_inner()
            .map_err(|e| anyhow::anyhow!("cannot flush the log: {}", e.error()))
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
        let path = self.path.clone();
        self.file
            .write_all(&(len as u32).to_le_bytes())
            .map_err(|e| explain(e, &path))?;
        self.file
            .write_all(&crc.to_le_bytes())
            .map_err(|e| explain(e, &path))?;
        self.file
            .write_all(&self.scratch)
            .map_err(|e| explain(e, &path))?;
        self.bytes += 8 + len as u64;
        self.records += 1;
        Ok(())
    }

    /// Appends a received frame (without its delimiter).
    pub fn append_frame(&mut self, host_time_us: u64, frame: &[u8]) -> Result<()> {
        self.append(KIND_FRAME, host_time_us, &[frame])
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
        )
    }

    /// Hands buffered records to the operating system.
    pub fn flush(&mut self) -> Result<()> {
        let path = self.path.clone();
        self.file.flush().map_err(|e| explain(e, &path))
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
