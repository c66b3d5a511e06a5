//! Where the commands' bytes come from and go to: `-` for standard input or
//! output where a file is expected, and files written whole or not at all.

use std::io::{Read, Write};
use std::path::{Path, PathBuf};

use anyhow::{Context, Result};

use crate::failure::{FailedAs, Failure};

/// The path that stands for standard input or output, as shell tools take it.
pub const STDIO_PATH: &str = "-";

/// True when `path` is `-`.
pub fn is_stdio(path: &Path) -> bool {
    path.as_os_str() == STDIO_PATH
}

/// An opened input: a file, or standard input for `-`.
pub struct Input {
    /// The bytes.
    pub reader: Box<dyn Read + Send>,
    /// The size when known (a file), for progress.
    pub size: Option<u64>,
    /// How to name it in messages.
    pub name: String,
}

impl std::fmt::Debug for Input {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("Input")
            .field("size", &self.size)
            .field("name", &self.name)
            .finish_non_exhaustive()
    }
}

/// Opens the file at `path` to read; `what` names it in the error, which
/// counts as a bad input file.
pub fn open_file(path: &Path, what: &str) -> Result<std::fs::File> {
    std::fs::File::open(path)
        .with_context(|| format!("cannot open {what} {}", path.display()))
        .failed_as(Failure::BadInput)
}

/// Opens `path` (`-`: standard input) to read; `what` names it in the error
/// ("log", "capture"), which counts as a bad input file.
pub fn open_input(path: &Path, what: &str) -> Result<Input> {
    if is_stdio(path) {
        return Ok(Input {
            reader: Box::new(std::io::stdin()),
            size: None,
            name: "standard input".into(),
        });
    }
    let file = open_file(path, what)?;
    Ok(Input {
        size: file.metadata().ok().map(|m| m.len()),
        reader: Box::new(file),
        name: path.display().to_string(),
    })
}

/// The first bytes of a gzip stream (RFC 1952, section 2.3.1).
const GZIP_MAGIC: [u8; 2] = [0x1f, 0x8b];

/// True when `file` holds a gzip stream (a log `record --compress` closed);
/// leaves the file read from its start.
pub fn is_gzip(file: &mut std::fs::File) -> std::io::Result<bool> {
    use std::io::Seek;
    let mut magic = [0u8; 2];
    let mut got = 0;
    while got < magic.len() {
        match file.read(&mut magic[got..])? {
            0 => break,
            n => got += n,
        }
    }
    file.seek(std::io::SeekFrom::Start(0))?;
    Ok(got == magic.len() && magic == GZIP_MAGIC)
}

/// Opens a log (`-`: standard input) to read; one that `record --compress`
/// gzipped is read through a decompressor, so callers see the log's bytes.
pub fn open_log(path: &Path) -> Result<Input> {
    let input = open_input(path, "log")?;
    let mut reader = std::io::BufReader::new(input.reader);
    let gzip = std::io::BufRead::fill_buf(&mut reader)
        .with_context(|| format!("cannot read {}", input.name))
        .failed_as(Failure::BadInput)?
        .starts_with(&GZIP_MAGIC);
    if gzip {
        return Ok(Input {
            reader: Box::new(flate2::bufread::MultiGzDecoder::new(reader)),
            size: None, // the log's own size is not known before the end
            name: input.name,
        });
    }
    Ok(Input {
        reader: Box::new(reader),
        ..input
    })
}

/// A file that appears under its name only once it is complete: written to
/// a temporary file beside it and renamed over it by [`AtomicFile::commit`].
/// Dropped without a commit (an error, a killed command), it leaves nothing
/// a reader could mistake for the finished file.
#[derive(Debug)]
pub struct AtomicFile {
    temp: tempfile::NamedTempFile,
    path: PathBuf,
}

impl AtomicFile {
    /// Starts writing `path`.
    pub fn create(path: &Path) -> Result<Self> {
        let dir = match path.parent() {
            Some(dir) if !dir.as_os_str().is_empty() => dir,
            _ => Path::new("."),
        };
        let mut builder = tempfile::Builder::new();
        builder.prefix(".gleaner-partial-");
        // Readable as any new file would be (0666 less the umask), not the
        // owner-only mode temporary files get.
        #[cfg(unix)]
        builder.permissions(std::os::unix::fs::PermissionsExt::from_mode(0o666));
        let temp = builder
            .tempfile_in(dir)
            .with_context(|| format!("cannot create {}", path.display()))?;
        Ok(Self {
            temp,
            path: path.to_owned(),
        })
    }

    /// Sets the time the file was last written (kept by the rename).
    pub fn set_modified(&self, time: std::time::SystemTime) -> Result<()> {
        self.temp
            .as_file()
            .set_modified(time)
            .with_context(|| format!("cannot write {}", self.path.display()))
    }

    /// Flushes to disk and gives the file its name.
    pub fn commit(self) -> Result<()> {
        let Self { temp, path } = self;
        temp.as_file()
            .sync_all()
            .with_context(|| format!("cannot write {}", path.display()))?;
        temp.persist(&path)
            .map_err(|e| e.error)
            .with_context(|| format!("cannot write {}", path.display()))?;
        Ok(())
    }
}

impl Write for AtomicFile {
    fn write(&mut self, buf: &[u8]) -> std::io::Result<usize> {
        self.temp.write(buf)
    }

    fn flush(&mut self) -> std::io::Result<()> {
        self.temp.flush()
    }
}

/// Writes `bytes` to `path` whole or not at all.
pub fn write_atomic(path: &Path, bytes: &[u8]) -> Result<()> {
    let mut file = AtomicFile::create(path)?;
    file.write_all(bytes)
        .with_context(|| format!("cannot write {}", path.display()))?;
    file.commit()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn an_uncommitted_file_leaves_nothing_behind() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("out.csv");
        std::fs::write(&path, "old\n").unwrap();
        {
            let mut file = AtomicFile::create(&path).unwrap();
            file.write_all(b"half a ro").unwrap();
            // Dropped: an error or a kill before the commit.
        }
        assert_eq!(std::fs::read_to_string(&path).unwrap(), "old\n");
        assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 1);
        write_atomic(&path, b"new\n").unwrap();
        assert_eq!(std::fs::read_to_string(&path).unwrap(), "new\n");
        assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 1);
        #[cfg(unix)]
        {
            use std::os::unix::fs::PermissionsExt;
            let mode = std::fs::metadata(&path).unwrap().permissions().mode();
            assert_ne!(
                mode & 0o044,
                0,
                "readable by others, as new files are: {mode:o}"
            );
        }
    }

    #[test]
    fn a_missing_input_is_a_bad_input_naming_it() {
        let err = open_input(Path::new("/nonexistent/run.gleanlog"), "log").unwrap_err();
        assert!(err.to_string().contains("cannot open log"), "{err}");
        assert_eq!(Failure::exit_code(&err), Failure::BadInput.code());
        assert!(is_stdio(Path::new("-")));
        assert!(!is_stdio(Path::new("./-")));
    }
}
