//! The files a run reads and writes, handled so that no input can block the
//! run, exhaust it, or make it write outside the folder of its `.ward` file.
//!
//! Inputs are regular files (never a FIFO or a device, which could block or
//! never end) of at most [`MAX_FILE_BYTES`], in UTF-8 (a byte-order mark is
//! dropped). Outputs go to a fresh temporary file beside their target,
//! created exclusively (so a planted link or another run's file is never
//! written through), with the target's permissions, synced to disk, and
//! renamed over the target; files written together are renamed together or
//! not at all. Output names are relative, without `..`, and may not lead
//! out of the folder through a link. Folder walks do not follow links.

use std::fs::{self, File, OpenOptions};
use std::io::{self, Read, Write};
use std::path::{Component, Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};
use std::sync::Arc;

use crate::budget::MAX_FILE_BYTES;
use crate::diagnostic::{Error, ErrorKind, Result, Source};
use crate::syntax::ast::Span;

/// Reads a `.ward` or `.rules` file as text.
pub fn read_text(path: &Path) -> Result<Arc<Source>> {
    let name = path.display().to_string();
    let cannot = |why: String| Error::new(ErrorKind::Io, format!("cannot read `{name}`: {why}"));
    let mut file = open_regular(path).map_err(|e| cannot(e.to_string()))?;
    let kind = file.metadata().map_err(|e| cannot(e.to_string()))?;
    if !kind.is_file() {
        return Err(cannot(
            "not a regular file (a folder, a pipe or a device is not read)".into(),
        ));
    }
    if kind.len() > MAX_FILE_BYTES {
        return Err(too_large(&name, kind.len()));
    }
    let mut bytes = Vec::new();
    (&mut file)
        .take(MAX_FILE_BYTES + 1)
        .read_to_end(&mut bytes)
        .map_err(|e| cannot(e.to_string()))?;
    if bytes.len() as u64 > MAX_FILE_BYTES {
        return Err(too_large(&name, bytes.len() as u64));
    }
    let text = match String::from_utf8(bytes) {
        Ok(text) => text,
        Err(e) => return Err(not_utf8(&name, e.as_bytes(), e.utf8_error())),
    };
    let text = match text.strip_prefix('\u{feff}') {
        Some(rest) => rest.to_string(),
        None => text,
    };
    Ok(Source::new(name, text))
}

/// The path of an output file `name.ext` written beside the `.ward` file
/// whose folder is `base`, or why it is refused: a name is relative, has
/// no `..`, and does not lead out of `base` through a link.
pub fn output_path(base: &Path, name: &str, ext: &str) -> std::result::Result<PathBuf, String> {
    let relative = Path::new(name);
    let plain = !name.is_empty()
        && relative
            .components()
            .all(|c| matches!(c, Component::Normal(_) | Component::CurDir));
    if !plain {
        return Err(format!(
            "`{name}` is not a relative name inside the folder of the file"
        ));
    }
    let target = base.join(format!("{name}.{ext}"));
    let folder = target.parent().unwrap_or(base);
    let root = canonical(base)?;
    let real = canonical(folder)?;
    if !real.starts_with(&root) {
        return Err(format!(
            "`{name}` leads out of the folder of the file (through a link)"
        ));
    }
    Ok(target)
}

/// Writes every `(path, text)` through its own exclusive temporary file,
/// then renames them all; if any write fails nothing is renamed, and if a
/// rename fails the targets already replaced get their old contents back.
/// A target that is a link is replaced by the new file, never written
/// through. A new file gets the permissions a plain file would; an existing
/// one keeps its own.
pub fn replace_together(files: &[(PathBuf, String)]) -> io::Result<()> {
    let mut written: Vec<(PathBuf, &Path)> = Vec::new();
    for (target, text) in files {
        match write_temporary(target, text.as_bytes()) {
            Ok(temporary) => written.push((temporary, target)),
            Err(e) => {
                for (temporary, _) in &written {
                    let _ = fs::remove_file(temporary);
                }
                return Err(e);
            }
        }
    }
    // How to undo each rename: put the old file back (kept under a
    // temporary name until every rename has gone through), remove a file
    // that did not exist, or, when the old one could not be kept, leave it.
    enum Undo {
        Restore(PathBuf),
        Remove,
        Leave,
    }
    let mut done: Vec<(Undo, &Path)> = Vec::new();
    for (i, (temporary, target)) in written.iter().enumerate() {
        let undo = match fs::symlink_metadata(target) {
            Ok(_) => {
                let keep = temporary_name(target);
                match fs::hard_link(target, &keep) {
                    Ok(()) => Undo::Restore(keep),
                    Err(_) => Undo::Leave,
                }
            }
            Err(_) => Undo::Remove,
        };
        if let Err(e) = fs::rename(temporary, target) {
            if let Undo::Restore(keep) = &undo {
                let _ = fs::remove_file(keep);
            }
            for (undo, target) in done.iter().rev() {
                match undo {
                    Undo::Restore(keep) => {
                        let _ = fs::rename(keep, target);
                    }
                    Undo::Remove => {
                        let _ = fs::remove_file(target);
                    }
                    Undo::Leave => {}
                }
            }
            for (temporary, _) in &written[i..] {
                let _ = fs::remove_file(temporary);
            }
            return Err(e);
        }
        done.push((undo, target));
    }
    for (undo, _) in done {
        if let Undo::Restore(keep) = undo {
            let _ = fs::remove_file(keep);
        }
    }
    if let Some((target, _)) = files.first() {
        sync_folder(target);
    }
    Ok(())
}

/// Every `.ward` file below `dir`, sorted. Links (to folders or files) are
/// not followed, so a link to a parent folder cannot make the walk loop
/// and no file outside the folder is checked or rewritten.
pub fn ward_files(dir: &Path) -> Result<Vec<PathBuf>> {
    let mut out = Vec::new();
    let mut pending = vec![dir.to_path_buf()];
    while let Some(folder) = pending.pop() {
        let entries = fs::read_dir(&folder).map_err(|e| {
            Error::new(
                ErrorKind::Io,
                format!("cannot read the folder `{}`: {e}", folder.display()),
            )
        })?;
        for entry in entries.flatten() {
            let Ok(kind) = entry.file_type() else {
                continue;
            };
            let path = entry.path();
            if kind.is_dir() {
                pending.push(path);
            } else if kind.is_file() && path.extension().is_some_and(|x| x == "ward") {
                out.push(path);
            }
        }
    }
    out.sort();
    Ok(out)
}

/// The real file behind `path` (a link is followed), if it lies inside
/// `root`; otherwise why not.
pub fn real_file_inside(root: &Path, path: &Path) -> std::result::Result<PathBuf, String> {
    let root = canonical(root)?;
    let real = canonical(path)?;
    if real.starts_with(&root) {
        Ok(real)
    } else {
        Err(format!(
            "`{}` is a link to a file outside `{}`",
            path.display(),
            root.display()
        ))
    }
}

// ───────────────────────────── helpers ─────────────────────────────

/// Opens `path` for reading without blocking on a pipe: non-blocking on
/// Unix (the caller refuses anything but a regular file).
fn open_regular(path: &Path) -> io::Result<File> {
    let mut options = OpenOptions::new();
    options.read(true);
    #[cfg(unix)]
    {
        use std::os::unix::fs::OpenOptionsExt;
        options.custom_flags(libc::O_NONBLOCK);
    }
    options.open(path)
}

fn too_large(name: &str, bytes: u64) -> Error {
    Error::new(
        ErrorKind::Io,
        format!(
            "cannot read `{name}`: {bytes} bytes, more than the limit of {} MiB",
            MAX_FILE_BYTES >> 20
        ),
    )
}

/// The error for a file that is not UTF-8, at the first bad byte.
fn not_utf8(name: &str, bytes: &[u8], e: std::str::Utf8Error) -> Error {
    let at = e.valid_up_to();
    let bad = bytes[at];
    // The text shown is read leniently; up to `at` it is the file itself.
    let source = Source::new(name, String::from_utf8_lossy(bytes).into_owned());
    let width = '\u{fffd}'.len_utf8();
    Error::at(
        ErrorKind::Io,
        &source,
        Span::new(at, at + width),
        format!("`{name}` is not UTF-8 text: byte 0x{bad:02x} does not start a character"),
    )
    .with_label("not UTF-8")
    .with_note("save the file as UTF-8")
}

fn canonical(path: &Path) -> std::result::Result<PathBuf, String> {
    let path = if path.as_os_str().is_empty() {
        Path::new(".")
    } else {
        path
    };
    fs::canonicalize(path).map_err(|e| format!("cannot resolve `{}`: {e}", path.display()))
}

/// A fresh name beside `target`: hidden, with the process id and a counter.
fn temporary_name(target: &Path) -> PathBuf {
    static COUNTER: AtomicU64 = AtomicU64::new(0);
    let n = COUNTER.fetch_add(1, Ordering::Relaxed);
    let stem = target
        .file_name()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_default();
    let nanos = std::time::SystemTime::now()
        .duration_since(std::time::UNIX_EPOCH)
        .map_or(0, |d| d.subsec_nanos());
    target.with_file_name(format!(".{stem}.{}-{n}-{nanos}.tmp", std::process::id()))
}

/// Writes `bytes` to a new temporary file beside `target`, created
/// exclusively with the target's permissions (when it is a file), synced.
fn write_temporary(target: &Path, bytes: &[u8]) -> io::Result<PathBuf> {
    let permissions = fs::metadata(target)
        .ok()
        .filter(|m| m.is_file())
        .map(|m| m.permissions());
    loop {
        let temporary = temporary_name(target);
        let mut options = OpenOptions::new();
        options.write(true).create_new(true);
        #[cfg(unix)]
        if let Some(p) = &permissions {
            use std::os::unix::fs::{OpenOptionsExt, PermissionsExt};
            options.mode(p.mode() & 0o7777);
        }
        let mut file = match options.open(&temporary) {
            Ok(f) => f,
            Err(e) if e.kind() == io::ErrorKind::AlreadyExists => continue,
            Err(e) => return Err(e),
        };
        let result = (|| {
            file.write_all(bytes)?;
            // The mode given at creation is reduced by the umask; the
            // target's own permissions are kept exactly.
            if let Some(p) = &permissions {
                file.set_permissions(p.clone())?;
            }
            file.sync_all()
        })();
        return match result {
            Ok(()) => Ok(temporary),
            Err(e) => {
                drop(file);
                let _ = fs::remove_file(&temporary);
                Err(e)
            }
        };
    }
}

/// Syncs the folder of `target`, so that the renames are on disk too (best
/// effort: not every system can open a folder).
fn sync_folder(target: &Path) {
    if let Some(folder) = target.parent() {
        let folder = if folder.as_os_str().is_empty() {
            Path::new(".")
        } else {
            folder
        };
        if let Ok(f) = File::open(folder) {
            let _ = f.sync_all();
        }
    }
}
