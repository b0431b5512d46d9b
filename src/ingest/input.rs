//! Inputs opened once: an extract, an evidence file, a rules file, a decisions file or a map.
//!
//! Whoever holds a file can change it while emend reads it, so every input is read through one
//! handle and never opened again by path (issue 16). A regular file is read up to the size it
//! had when it was opened, and [`Input::finish`] refuses it when its size or modification time
//! moved meanwhile (it was still being written, or rewritten in place). A pipe or FIFO (and
//! standard input) is copied first into a private, already-unlinked temporary file, so a second
//! pass reads the same bytes. Devices, sockets and folders are refused before anything is read:
//! `/dev/zero` as evidence would otherwise never end. Nothing here reads the environment; the
//! caller passes the limits.

use crate::error::{Error, Result};
use std::fs::File;
use std::io::{Read, Seek, Write};
use std::path::{Path, PathBuf};
use std::time::SystemTime;

/// The default largest evidence (and rules) file, in bytes: 256 MiB.
pub const DEFAULT_MAX_EVIDENCE: u64 = 256 * 1024 * 1024;

/// How an input is opened.
#[derive(Debug, Clone, Default)]
pub struct InputOptions {
    /// Refuse an input larger than this many bytes (`None`: no limit).
    pub max_bytes: Option<u64>,
    /// Where a pipe is copied to (the store's folder, say); the system temp folder when `None`.
    pub spool_dir: Option<PathBuf>,
}

/// Size and modification time of a regular file, as seen through its handle.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
struct Stamp {
    len: u64,
    modified: Option<SystemTime>,
}

impl Stamp {
    fn of(meta: &std::fs::Metadata) -> Stamp {
        Stamp {
            len: meta.len(),
            modified: meta.modified().ok(),
        }
    }
}

/// An input opened once; read it with [`Input::reader`], check it with [`Input::finish`].
#[derive(Debug)]
pub struct Input {
    name: PathBuf,
    file: File,
    len: u64,
    /// `Some` for a regular file read in place; `None` for a private copy of a pipe.
    stamp: Option<Stamp>,
}

/// What kind of thing a path names, for the refusal of anything but a file or a pipe.
fn refuse_kind(path: &Path, ft: &std::fs::FileType) -> Result<()> {
    use std::os::unix::fs::FileTypeExt;
    if ft.is_file() || ft.is_fifo() {
        return Ok(());
    }
    if ft.is_dir() {
        return Err(Error::NotAFile(path.to_path_buf()));
    }
    let kind = if ft.is_char_device() {
        "a character device"
    } else if ft.is_block_device() {
        "a block device"
    } else if ft.is_socket() {
        "a socket"
    } else {
        "not a regular file"
    };
    Err(Error::NotAnInput {
        path: path.to_path_buf(),
        kind,
    })
}

impl Input {
    /// Open `path`: a regular file is kept open where it is, a FIFO is copied to a private
    /// temporary file first. Devices, sockets and folders are refused before they are opened.
    pub fn open(path: &Path, opts: &InputOptions) -> Result<Input> {
        // Look before opening: opening a device can have effects, and reading one never ends.
        let meta = std::fs::metadata(path).map_err(|e| Error::io(path, e))?;
        refuse_kind(path, &meta.file_type())?;
        let file = File::open(path).map_err(|e| Error::io(path, e))?;
        // And look again at what was opened, in case the path was swapped meanwhile.
        let meta = file.metadata().map_err(|e| Error::io(path, e))?;
        refuse_kind(path, &meta.file_type())?;
        if !meta.is_file() {
            return Input::spool(path, file, opts);
        }
        let stamp = Stamp::of(&meta);
        if let Some(max) = opts.max_bytes
            && stamp.len > max
        {
            return Err(Error::TooLarge {
                path: path.to_path_buf(),
                limit: max,
            });
        }
        Ok(Input {
            name: path.to_path_buf(),
            file,
            len: stamp.len,
            stamp: Some(stamp),
        })
    }

    /// Copy a stream (standard input, a pipe) to a private temporary file, named `name` in
    /// errors, refusing it once it passes `opts.max_bytes`.
    pub fn spool(name: &Path, mut from: impl Read, opts: &InputOptions) -> Result<Input> {
        // `tempfile_in` creates the file exclusively and unlinks it at once: nobody else can
        // open it, and nothing is left behind if emend is killed.
        let tmp = match &opts.spool_dir {
            Some(dir) => tempfile::tempfile_in(dir).map_err(|e| Error::io(dir, e))?,
            None => tempfile::tempfile().map_err(|e| Error::io(std::env::temp_dir(), e))?,
        };
        let mut out = std::io::BufWriter::with_capacity(256 * 1024, tmp);
        let cap = opts.max_bytes.map_or(u64::MAX, |m| m.saturating_add(1));
        let n =
            std::io::copy(&mut (&mut from).take(cap), &mut out).map_err(|e| Error::io(name, e))?;
        if let Some(max) = opts.max_bytes
            && n > max
        {
            return Err(Error::TooLarge {
                path: name.to_path_buf(),
                limit: max,
            });
        }
        let mut file = out
            .into_inner()
            .map_err(|e| Error::io(name, e.into_error()))?;
        file.flush().map_err(|e| Error::io(name, e))?;
        file.rewind().map_err(|e| Error::io(name, e))?;
        Ok(Input {
            name: name.to_path_buf(),
            file,
            len: n,
            stamp: None,
        })
    }

    /// The name errors use (the path given, or what the caller called a stream).
    pub fn path(&self) -> &Path {
        &self.name
    }

    /// The last component of the name, as recorded in a commit.
    pub fn file_name(&self) -> String {
        self.name
            .file_name()
            .map(|n| n.to_string_lossy().into_owned())
            .unwrap_or_default()
    }

    /// The bytes to read: the size at open for a regular file, the copied size for a pipe.
    pub fn len(&self) -> u64 {
        self.len
    }

    /// Whether the input has no bytes.
    pub fn is_empty(&self) -> bool {
        self.len == 0
    }

    /// A reader over the input from where the handle stands, never past [`Input::len`]: a file
    /// that grows while it is read is not followed (and [`Input::finish`] refuses it).
    pub fn reader(&self) -> std::io::Take<&File> {
        (&self.file).take(self.len)
    }

    /// Back to the first byte, for a second pass through the same handle.
    pub fn rewind(&self) -> Result<()> {
        (&self.file).rewind().map_err(|e| Error::io(&self.name, e))
    }

    /// Refuse the input when it changed while it was read: `n_read` bytes were read in all (a
    /// shorter read means the file shrank), and a regular file must still have the size and
    /// modification time it had when it was opened.
    pub fn finish(&self, n_read: u64) -> Result<()> {
        let changed = || Error::Changed(self.name.clone());
        if n_read != self.len {
            return Err(changed());
        }
        if let Some(stamp) = self.stamp {
            let now = self.file.metadata().map_err(|e| Error::io(&self.name, e))?;
            if Stamp::of(&now) != stamp {
                return Err(changed());
            }
        }
        Ok(())
    }

    /// Read the whole input into memory (rules files, maps and other small inputs), checked
    /// with [`Input::finish`].
    pub fn read_all(&self) -> Result<Vec<u8>> {
        let mut bytes = Vec::with_capacity(usize::try_from(self.len.min(1 << 24)).unwrap_or(0));
        self.reader()
            .read_to_end(&mut bytes)
            .map_err(|e| Error::io(&self.name, e))?;
        self.finish(bytes.len() as u64)?;
        Ok(bytes)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn opts() -> InputOptions {
        InputOptions::default()
    }

    #[test]
    fn a_file_changed_between_open_and_the_end_check_is_refused() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("x.csv");
        std::fs::write(&path, "id,v\nA,1\n").unwrap();
        // Unchanged: read through and accepted.
        let input = Input::open(&path, &opts()).unwrap();
        assert_eq!(input.read_all().unwrap(), b"id,v\nA,1\n");
        // Grown after open (still being written): only the bytes present at open are read,
        // and the end check refuses it.
        let input = Input::open(&path, &opts()).unwrap();
        std::fs::OpenOptions::new()
            .append(true)
            .open(&path)
            .unwrap()
            .write_all(b"B,2\n")
            .unwrap();
        let mut seen = Vec::new();
        input.reader().read_to_end(&mut seen).unwrap();
        assert_eq!(seen, b"id,v\nA,1\n");
        let err = input.finish(seen.len() as u64).unwrap_err();
        assert!(matches!(&err, Error::Changed(p) if p == &path), "{err:?}");
        assert!(err.to_string().contains("changed while it was being read"));
        // Rewritten in place to the same size: the modification time moves.
        std::fs::write(&path, "id,v\nA,1\n").unwrap();
        let input = Input::open(&path, &opts()).unwrap();
        let later = SystemTime::now() + std::time::Duration::from_secs(5);
        let f = std::fs::OpenOptions::new().write(true).open(&path).unwrap();
        std::os::unix::fs::FileExt::write_all_at(&f, b"id,v\nA,9\n", 0).unwrap();
        f.set_modified(later).unwrap();
        assert!(matches!(input.finish(input.len()), Err(Error::Changed(_))));
        // Shrunk: fewer bytes than at open.
        let input = Input::open(&path, &opts()).unwrap();
        std::fs::OpenOptions::new()
            .write(true)
            .open(&path)
            .unwrap()
            .set_len(3)
            .unwrap();
        let mut seen = Vec::new();
        input.reader().read_to_end(&mut seen).unwrap();
        assert_eq!(seen.len(), 3);
        assert!(matches!(input.finish(3), Err(Error::Changed(_))));
    }

    #[test]
    fn devices_and_folders_are_refused_and_size_limits_hold() {
        let err = Input::open(Path::new("/dev/zero"), &opts()).unwrap_err();
        assert!(
            matches!(
                &err,
                Error::NotAnInput {
                    kind: "a character device",
                    ..
                }
            ),
            "{err:?}"
        );
        assert!(err.to_string().contains("/dev/zero"));
        let dir = tempfile::tempdir().unwrap();
        assert!(matches!(
            Input::open(dir.path(), &opts()),
            Err(Error::NotAFile(_))
        ));
        let path = dir.path().join("ten.bin");
        std::fs::write(&path, [7u8; 10]).unwrap();
        let small = InputOptions {
            max_bytes: Some(9),
            spool_dir: Some(dir.path().to_path_buf()),
        };
        assert!(matches!(
            Input::open(&path, &small),
            Err(Error::TooLarge { limit: 9, .. })
        ));
        // A stream is copied up to the limit and refused past it.
        assert!(matches!(
            Input::spool(Path::new("<stdin>"), &[7u8; 10][..], &small),
            Err(Error::TooLarge { .. })
        ));
        let spooled = Input::spool(Path::new("<stdin>"), &[7u8; 9][..], &small).unwrap();
        assert_eq!(spooled.len(), 9);
        assert_eq!(spooled.read_all().unwrap(), [7u8; 9]);
        spooled.rewind().unwrap();
        assert_eq!(spooled.read_all().unwrap(), [7u8; 9], "a second pass");
    }
}
