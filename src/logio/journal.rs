//! The alert journal (replay and live): alert events appended as JSON lines, flushed on
//! every event. A write error is reported once on stderr and monitoring goes on.

use std::fs::{File, OpenOptions};
use std::io::Write;
use std::path::Path;

use crate::rules::AlertEvent;

/// An open journal.
pub struct Journal {
    file: File,
    path: String,
    failed: bool,
}

impl Journal {
    /// Opens (creating or appending to) a journal file.
    pub fn open(path: &Path) -> std::io::Result<Journal> {
        let file = OpenOptions::new().create(true).append(true).open(path)?;
        Ok(Journal { file, path: path.display().to_string(), failed: false })
    }

    /// Appends one event and flushes it.
    pub fn append(&mut self, e: &AlertEvent) {
        let mut line = serde_json::to_string(e).unwrap_or_default();
        line.push('\n');
        if let Err(err) = self.file.write_all(line.as_bytes()).and_then(|_| self.file.flush()) {
            if !self.failed {
                tracing::error!(path = %self.path, error = %err, "alert journal write failed; alerts go on");
                errln!("plumbline: alert journal {}: {err}", self.path);
                self.failed = true;
            }
        }
    }
}
