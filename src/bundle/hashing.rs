//! A bundle file written, hashed and counted on the way (no second read).
//!
//! Writes gather in batches of a fixed size; each full batch goes to the file and then to a
//! hashing thread, so that hashing a large panel runs beside the encoding that produces it.
//! The hasher hands emptied batches back for reuse.
//!
//! On Linux the file is opened for direct I/O where its file system allows it: full batches
//! (block-aligned in memory, in length and in the file) go to the disk without a copy into the
//! page cache, whose fresh pages the kernel must first find and clear — on a busy host the
//! larger part of the time a 1 GB panel took to write. The last, partial batch goes through
//! the page cache as usual, and so does everything on a file system that refuses direct I/O.

use std::fs;
use std::io::Write;
use std::path::{Path, PathBuf};
use std::sync::mpsc::{channel, sync_channel, Receiver, SyncSender};

use sha2::{Digest, Sha256};

use super::OutputRecord;
use crate::{Error, Result};

/// Bytes gathered before a batch is written and hashed: a multiple of [`BLOCK`].
const HASH_BATCH: usize = 4 << 20;

/// The alignment direct I/O asks of memory, lengths and file offsets (the larger of the
/// usual logical block sizes, 512 and 4096 bytes).
const BLOCK: usize = 4096;

/// One batch: [`HASH_BATCH`] bytes of room starting at a [`BLOCK`]-aligned address.
struct Batch {
    buf: Vec<u8>,
    start: usize,
    len: usize,
}

impl Batch {
    fn new() -> Batch {
        let buf = vec![0u8; HASH_BATCH + BLOCK];
        let start = buf.as_ptr().align_offset(BLOCK);
        Batch { buf, start, len: 0 }
    }

    fn bytes(&self) -> &[u8] {
        &self.buf[self.start..self.start + self.len]
    }

    fn room(&self) -> usize {
        HASH_BATCH - self.len
    }

    /// Append the first bytes of `b` that fit; returns how many.
    fn fill(&mut self, b: &[u8]) -> usize {
        let n = b.len().min(self.room());
        let at = self.start + self.len;
        self.buf[at..at + n].copy_from_slice(&b[..n]);
        self.len += n;
        n
    }
}

/// A file being written, hashed and counted on the way.
pub(super) struct HashingFile {
    path: PathBuf,
    file: fs::File,
    /// Whether the file is open for direct I/O.
    direct: bool,
    /// Bytes in the file so far.
    written: u64,
    batch: Batch,
    to_hasher: Option<SyncSender<Batch>>,
    emptied: Receiver<Batch>,
    hasher: Option<std::thread::JoinHandle<Sha256>>,
    bytes: u64,
}

impl HashingFile {
    /// Create `name` in `dir`, for direct I/O unless `PANELREADY_NO_DIRECT_IO` is set (on a
    /// slow disk or a network file system the page cache may well be the faster way: the
    /// program then ends before the disk has the file).
    pub(super) fn create(dir: &Path, name: &str) -> Result<HashingFile> {
        let direct = std::env::var_os("PANELREADY_NO_DIRECT_IO").is_none();
        HashingFile::create_with(dir, name, direct)
    }

    /// [`HashingFile::create`], asking for direct I/O only when `direct`.
    fn create_with(dir: &Path, name: &str, direct: bool) -> Result<HashingFile> {
        let path = dir.join(name);
        let (file, direct) = open(&path, direct).map_err(Error::io(&path))?;
        let (to_hasher, batches) = sync_channel::<Batch>(4);
        let (give_back, emptied) = channel::<Batch>();
        let hasher = std::thread::spawn(move || {
            let mut hash = Sha256::new();
            for mut batch in batches {
                hash.update(batch.bytes());
                batch.len = 0;
                // The writer may have finished; then the batch is simply dropped.
                let _ = give_back.send(batch);
            }
            hash
        });
        Ok(HashingFile {
            path,
            file,
            direct,
            written: 0,
            batch: Batch::new(),
            to_hasher: Some(to_hasher),
            emptied,
            hasher: Some(hasher),
            bytes: 0,
        })
    }

    /// Write the gathered batch to the file and pass it to the hasher.
    fn spill(&mut self) -> std::io::Result<()> {
        if self.batch.len == 0 {
            return Ok(());
        }
        self.write_out()?;
        let next = self.emptied.try_recv().unwrap_or_else(|_| Batch::new());
        let full = std::mem::replace(&mut self.batch, next);
        self.to_hasher
            .as_ref()
            .and_then(|tx| tx.send(full).ok())
            .ok_or_else(|| std::io::Error::other("the hashing thread stopped"))
    }

    /// The batch into the file: directly while its length keeps the file's end aligned, else
    /// (and from then on) through the page cache.
    fn write_out(&mut self) -> std::io::Result<()> {
        if self.direct && !self.batch.len.is_multiple_of(BLOCK) {
            self.through_the_cache()?;
        }
        let (mut at, end) = (self.batch.start, self.batch.start + self.batch.len);
        while at < end {
            match self.file.write(&self.batch.buf[at..end]) {
                Ok(0) => return Err(std::io::ErrorKind::WriteZero.into()),
                Ok(n) => {
                    at += n;
                    self.written += n as u64;
                    if self.direct && !n.is_multiple_of(BLOCK) {
                        self.through_the_cache()?;
                    }
                }
                Err(e) if e.kind() == std::io::ErrorKind::Interrupted => {}
                // Refused before anything was written: the same bytes through the page cache.
                Err(e) if self.direct && e.raw_os_error() == Some(EINVAL) => {
                    self.through_the_cache()?;
                }
                Err(e) => return Err(e),
            }
        }
        Ok(())
    }

    /// Go on writing through the page cache: the file opened again, without direct I/O, at
    /// its end so far.
    fn through_the_cache(&mut self) -> std::io::Result<()> {
        use std::io::{Seek, SeekFrom};
        let mut file = fs::OpenOptions::new().write(true).open(&self.path)?;
        file.seek(SeekFrom::Start(self.written))?;
        self.file = file;
        self.direct = false;
        Ok(())
    }

    /// Write what is left and return the file's record.
    pub(super) fn finish(mut self, name: &str) -> Result<OutputRecord> {
        self.spill().map_err(Error::io(&self.path))?;
        self.file.flush().map_err(Error::io(&self.path))?;
        drop(self.to_hasher.take());
        let hash = self
            .hasher
            .take()
            .expect("joined once")
            .join()
            .unwrap_or_else(|panic| std::panic::resume_unwind(panic));
        Ok(OutputRecord {
            path: name.to_string(),
            sha256: format!("{:x}", hash.finalize()),
            bytes: self.bytes,
        })
    }
}

impl Write for HashingFile {
    fn write(&mut self, buf: &[u8]) -> std::io::Result<usize> {
        let mut rest = buf;
        while !rest.is_empty() {
            let n = self.batch.fill(rest);
            rest = &rest[n..];
            if self.batch.room() == 0 {
                self.spill()?;
            }
        }
        self.bytes += buf.len() as u64;
        Ok(buf.len())
    }

    /// The gathered batch stays until it is full or the file is finished (a partial batch
    /// written early would end direct I/O for the rest of the file); nothing reads the file
    /// before [`HashingFile::finish`].
    fn flush(&mut self) -> std::io::Result<()> {
        Ok(())
    }
}

#[cfg(target_os = "linux")]
const EINVAL: i32 = libc::EINVAL;
#[cfg(not(target_os = "linux"))]
const EINVAL: i32 = 22;

/// Create `path`, for direct I/O when `direct` and the file system allows it; says which.
#[cfg(target_os = "linux")]
fn open(path: &Path, direct: bool) -> std::io::Result<(fs::File, bool)> {
    use std::os::unix::fs::OpenOptionsExt;
    let mut options = fs::OpenOptions::new();
    options.write(true).create(true).truncate(true);
    if direct {
        if let Ok(file) = options.clone().custom_flags(libc::O_DIRECT).open(path) {
            return Ok((file, true));
        }
    }
    Ok((options.open(path)?, false))
}

#[cfg(not(target_os = "linux"))]
fn open(path: &Path, _direct: bool) -> std::io::Result<(fs::File, bool)> {
    Ok((fs::File::create(path)?, false))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The file holds exactly the bytes written, and its record the SHA-256 and count of them,
    /// for writes of every awkward size — a byte, one short of a block, a batch and one more,
    /// many batches at once — with direct I/O asked for and not. The digest of a large file
    /// against the same `sha2` hashing the bytes in one piece; the batching itself against the
    /// published example of FIPS 180-2 (appendix B.1: SHA-256 of "abc").
    #[test]
    fn the_file_and_its_record_hold_exactly_what_was_written() {
        let dir = std::env::temp_dir().join(format!("panelready-hashing-{}", std::process::id()));
        fs::create_dir_all(&dir).unwrap();
        let sizes = [
            1,
            BLOCK - 1,
            HASH_BATCH + 1,
            3 * HASH_BATCH + 17,
            5,
            HASH_BATCH - 6,
        ];
        let mut expected = Vec::new();
        let mut seed = 0x9e37_79b9_7f4a_7c15u64;
        for (i, size) in sizes.iter().enumerate() {
            expected.extend((0..*size).map(|j| {
                seed ^= seed << 13;
                seed ^= seed >> 7;
                seed ^= seed << 17;
                (seed as usize + i + j) as u8
            }));
        }
        for direct in [true, false] {
            for total in [expected.len(), 2 * HASH_BATCH, HASH_BATCH - 6, 0] {
                let name = format!("f-{direct}-{total}");
                let mut f = HashingFile::create_with(&dir, &name, direct).unwrap();
                let mut at = 0;
                for size in sizes.iter().cycle() {
                    let n = (*size).min(total - at);
                    f.write_all(&expected[at..at + n]).unwrap();
                    f.flush().unwrap();
                    at += n;
                    if at == total {
                        break;
                    }
                }
                let record = f.finish(&name).unwrap();
                let written = fs::read(dir.join(&name)).unwrap();
                assert_eq!(written, &expected[..total], "{name}");
                assert_eq!(record.bytes, total as u64);
                assert_eq!(record.sha256, crate::load::sha256_hex(&expected[..total]));
            }
        }
        let mut f = HashingFile::create_with(&dir, "abc", true).unwrap();
        for b in [b"a", b"b", b"c"] {
            f.write_all(b).unwrap();
        }
        let record = f.finish("abc").unwrap();
        assert_eq!(
            record.sha256,
            "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
        );
        assert_eq!(fs::read(dir.join("abc")).unwrap(), b"abc");
        fs::remove_dir_all(&dir).unwrap();
    }
}
