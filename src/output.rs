//! Output files written whole or not at all.
//!
//! [`AtomicFile`] writes to a hidden temporary file in the target folder and renames it into
//! place on [`AtomicFile::commit`]; dropped uncommitted (an error, a panic, an interrupt that
//! unwinds), it removes the temporary file. A killed process leaves at most a stray
//! `.NAME.ooksift-tmp-PID` file, never a half-written `NAME`. Existing outputs are kept unless
//! `force` is set.
//!
//! ```no_run
//! use std::io::Write;
//! let mut f = ooksift::output::AtomicFile::create("report.json".as_ref(), false).unwrap();
//! f.write_all(b"{}").unwrap();
//! f.commit().unwrap();
//! ```

use std::fs::{self, File};
use std::io::{self, BufWriter, Write};
use std::path::{Path, PathBuf};

/// A file being written; visible under its name only once committed.
pub struct AtomicFile {
    tmp: PathBuf,
    target: PathBuf,
    out: Option<BufWriter<File>>,
}

/// Why an output could not be created.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum OutputError {
    /// The target exists and `force` was not given.
    #[error("{0} exists; add --force to replace it")]
    Exists(String),
    /// The file system refused.
    #[error("cannot write {path}: {source}")]
    Io {
        /// The target.
        path: String,
        /// The cause.
        source: io::Error,
    },
}

impl AtomicFile {
    /// Starts writing `target`; refuses an existing target unless `force`.
    pub fn create(target: &Path, force: bool) -> Result<AtomicFile, OutputError> {
        let name = target.display().to_string();
        if !force && target.exists() {
            return Err(OutputError::Exists(name));
        }
        let dir = match target.parent() {
            Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
            _ => PathBuf::from("."),
        };
        let file_name = target
            .file_name()
            .map(|n| n.to_string_lossy().into_owned())
            .unwrap_or_else(|| "output".into());
        let tmp = dir.join(format!(".{file_name}.ooksift-tmp-{}", std::process::id()));
        let f = File::create(&tmp).map_err(|source| OutputError::Io {
            path: name.clone(),
            source,
        })?;
        Ok(AtomicFile {
            tmp,
            target: target.to_path_buf(),
            out: Some(BufWriter::with_capacity(1 << 20, f)),
        })
    }

    /// The final path.
    pub fn target(&self) -> &Path {
        &self.target
    }

    /// Flushes, syncs and renames the file into place.
    pub fn commit(mut self) -> Result<(), OutputError> {
        let err = |source| OutputError::Io {
            path: self.target.display().to_string(),
            source,
        };
        if let Some(w) = self.out.take() {
            let f = w.into_inner().map_err(|e| err(e.into_error()))?;
            f.sync_all().map_err(err)?;
        }
        fs::rename(&self.tmp, &self.target).map_err(err)
    }
}

impl Write for AtomicFile {
    fn write(&mut self, buf: &[u8]) -> io::Result<usize> {
        match self.out.as_mut() {
            Some(w) => w.write(buf),
            None => Err(io::Error::other("file already committed")),
        }
    }

    fn flush(&mut self) -> io::Result<()> {
        match self.out.as_mut() {
            Some(w) => w.flush(),
            None => Ok(()),
        }
    }
}

impl Drop for AtomicFile {
    fn drop(&mut self) {
        if self.out.take().is_some() {
            let _ = fs::remove_file(&self.tmp);
        }
    }
}

/// Writes `bytes` to `target` atomically.
pub fn write_atomic(target: &Path, bytes: &[u8], force: bool) -> Result<(), OutputError> {
    let mut f = AtomicFile::create(target, force)?;
    f.write_all(bytes).map_err(|source| OutputError::Io {
        path: target.display().to_string(),
        source,
    })?;
    f.commit()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn commit_renames_and_drop_cleans_up() {
        let dir = tempfile::tempdir().expect("tempdir");
        let target = dir.path().join("out.txt");
        {
            let mut f = AtomicFile::create(&target, false).expect("create");
            f.write_all(b"half").expect("write");
            // Dropped without commit.
        }
        assert!(!target.exists());
        assert_eq!(fs::read_dir(dir.path()).expect("list").count(), 0);
        write_atomic(&target, b"whole", false).expect("write");
        assert_eq!(fs::read(&target).expect("read"), b"whole");
        assert!(matches!(
            write_atomic(&target, b"again", false),
            Err(OutputError::Exists(_))
        ));
        write_atomic(&target, b"again", true).expect("forced");
        assert_eq!(fs::read(&target).expect("read"), b"again");
    }
}
