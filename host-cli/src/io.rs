//! Output files: `-` is standard output, any other path a file created (or truncated),
//! both buffered. Every command that writes a file opens it here. Files that must survive
//! a power cut are written by [`write_durably`]: a temporary file beside the target,
//! written and synced, then renamed over it, then the directory synced; a reader sees the
//! old file or the new one, never a part.

use std::fs::File;
use std::io::{BufWriter, Write};
use std::path::Path;

use anyhow::{Context, Result};

/// Opens an output (`-` is standard output).
pub fn create_output(path: &Path) -> Result<Box<dyn Write>> {
    if path.as_os_str() == "-" {
        Ok(Box::new(BufWriter::new(std::io::stdout().lock())))
    } else {
        let file =
            File::create(path).with_context(|| format!("{}: cannot create", path.display()))?;
        Ok(Box::new(BufWriter::with_capacity(1 << 16, file)))
    }
}

/// Opens an output to add to (`-` is standard output): a file is created when absent and
/// written after what it holds.
pub fn append_output(path: &Path) -> Result<Box<dyn Write>> {
    if path.as_os_str() == "-" {
        return create_output(path);
    }
    let file = std::fs::OpenOptions::new()
        .append(true)
        .create(true)
        .open(path)
        .with_context(|| format!("{}: cannot open to append", path.display()))?;
    Ok(Box::new(BufWriter::with_capacity(1 << 16, file)))
}

/// Replaces `path` with `bytes` so that a power cut leaves the old content or the new,
/// never a mix: write `path.tmp`, sync it, rename it over `path`. The caller syncs the
/// directory ([`sync_directory`]) once after a group of such writes.
pub fn write_durably(path: &Path, bytes: &[u8]) -> Result<()> {
    let mut temporary = path.as_os_str().to_owned();
    temporary.push(".tmp");
    let temporary = std::path::PathBuf::from(temporary);
    let mut file = File::create(&temporary)
        .with_context(|| format!("{}: cannot create", temporary.display()))?;
    file.write_all(bytes)
        .and_then(|_| file.sync_all())
        .with_context(|| format!("{}: cannot write", temporary.display()))?;
    std::fs::rename(&temporary, path).with_context(|| {
        format!(
            "{}: cannot rename to {}",
            temporary.display(),
            path.display()
        )
    })
}

/// Syncs a directory, so that the renames done in it survive a power cut.
pub fn sync_directory(dir: &Path) -> Result<()> {
    File::open(dir)
        .and_then(|d| d.sync_all())
        .with_context(|| format!("{}: cannot sync the directory", dir.display()))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn durable_writes_replace_whole_files() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("state.bin");
        write_durably(&path, b"first").unwrap();
        write_durably(&path, b"second").unwrap();
        sync_directory(dir.path()).unwrap();
        assert_eq!(std::fs::read(&path).unwrap(), b"second");
        assert!(!dir.path().join("state.bin.tmp").exists());
    }
}
