//! Output files: `-` is standard output, any other path a file created (or truncated),
//! both buffered. Every command that writes a file opens it here.

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
