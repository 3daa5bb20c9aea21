//! [`NcWriter`]: writes a netCDF-4-compatible HDF5 file through a temporary file that is renamed
//! onto the target only when the writer finishes.
//!
//! Layout choices (netCDF-4 conventions, reference: netCDF-C "NetCDF-4 Format" specification,
//! from memory; checked against xarray/h5netcdf, netCDF4-python and h5py, see the tests):
//! - the file and every group track and index link and attribute creation order, which
//!   netCDF-C needs to open a file for writing and which keeps the order variables were added;
//! - library-version bounds start at 1.8, so attributes larger than 64 KiB are stored densely;
//! - each dimension is a dimension scale: a coordinate variable, or a placeholder `f32` dataset
//!   whose `NAME` is netCDF-C's "not a netCDF variable" text followed by the length;
//! - variables along the unlimited dimension are chunked (whole rows) with shuffle and deflate at
//!   the writer's level (default [`DEFAULT_DEFLATE_LEVEL`]; level 0: chunked without filters),
//!   and appended records are buffered up to a few chunks before they are written;
//! - fixed-size variables of at least [`COMPRESS_MIN_VALUES`] values are chunked with the same
//!   filters, or contiguous at level 0; smaller ones are always contiguous.
//!
//! Chunks are not passed through HDF5's filter pipeline: [`Packer`] applies the same two filters
//! itself (HDF5's byte shuffle, then zlib-format deflate from libdeflate, several chunks at once
//! on rayon's threads) and hands each finished chunk to `H5Dwrite_chunk` (HDF5's direct chunk
//! write). The dataset's filter pipeline still names shuffle and deflate, so every reader decodes
//! the chunks with its own zlib; only the compressed bytes differ from zlib's, never the values.

use std::collections::HashMap;
use std::ffi::CString;
use std::path::{Path, PathBuf};
use std::str::FromStr;
use std::sync::atomic::{AtomicU64, Ordering};

use hdf5::filters::Filter;
use hdf5::plist::file_create::{AttrCreationOrder, LinkCreationOrder};
use hdf5::types::VarLenUnicode;
use hdf5::{Dataset, Extent, Extents, File, H5Type, Location};
use libdeflater::{CompressionLvl, Compressor};
use rayon::prelude::*;

use super::{ds, OutputError, NOT_A_VARIABLE};

/// The deflate levels the config allows (declared beside `[output]`'s spec).
pub use crate::config::spec::{DEFAULT_DEFLATE_LEVEL, MAX_DEFLATE_LEVEL};
/// Fixed-size variables with at least this many values are chunked and compressed.
const COMPRESS_MIN_VALUES: usize = 4096;
/// Upper bound on the values in one chunk of a fixed-size variable (1 MiB of `f64`).
const MAX_CHUNK_VALUES: usize = 1 << 17;
/// Rows per chunk of a record variable, unless the rows are short (see [`record_chunk_rows`]).
const RECORD_CHUNK_ROWS: usize = 64;
/// Short records are grouped so that one chunk holds at least this many values.
const RECORD_CHUNK_MIN_VALUES: usize = 1024;
/// Raw bytes of record data buffered per variable before its chunks are compressed together
/// (and at most [`MAX_BATCH_CHUNKS`] chunks): enough chunks to keep every core busy.
const BATCH_BYTES: usize = 1 << 20;
/// Most chunks compressed together in one batch.
const MAX_BATCH_CHUNKS: usize = 16;

/// Distinguishes temporary files of several writers in one process.
static TEMP_SEQ: AtomicU64 = AtomicU64::new(0);

/// An attribute value: a variable-length UTF-8 string, a double or a 64-bit integer.
#[derive(Clone, Debug, PartialEq)]
pub enum Attr {
    /// Text, stored as a scalar variable-length UTF-8 string.
    Str(String),
    /// A real number, stored as a scalar `f64`.
    F64(f64),
    /// An integer, stored as a scalar `i64`.
    I64(i64),
}

impl From<&str> for Attr {
    fn from(value: &str) -> Self {
        Attr::Str(value.to_owned())
    }
}

impl From<String> for Attr {
    fn from(value: String) -> Self {
        Attr::Str(value)
    }
}

impl From<f64> for Attr {
    fn from(value: f64) -> Self {
        Attr::F64(value)
    }
}

impl From<i64> for Attr {
    fn from(value: i64) -> Self {
        Attr::I64(value)
    }
}

impl From<i32> for Attr {
    fn from(value: i32) -> Self {
        Attr::I64(i64::from(value))
    }
}

/// Element type of a variable.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum Kind {
    F64,
    I32,
}

impl Kind {
    fn name(self) -> &'static str {
        match self {
            Kind::F64 => "f64",
            Kind::I32 => "i32",
        }
    }
}

/// Rows appended but not yet written.
enum Rows {
    F64(Vec<f64>),
    I32(Vec<i32>),
}

impl Rows {
    /// Number of buffered values (the tests check the buffer never exceeds one chunk).
    #[cfg(test)]
    fn len(&self) -> usize {
        match self {
            Rows::F64(v) => v.len(),
            Rows::I32(v) => v.len(),
        }
    }
}

/// Element types the writer stores.
trait Elem: H5Type + Copy {
    const KIND: Kind;
    fn rows(buf: &mut Rows) -> Option<&mut Vec<Self>>;

    /// The values' bytes in memory order, which is the dataset's (native) file type.
    fn bytes(values: &[Self]) -> &[u8] {
        // SAFETY: `f64` and `i32` (the only implementors) have no padding and every byte is
        // initialised; the slice borrows `values` for its lifetime.
        unsafe { std::slice::from_raw_parts(values.as_ptr().cast::<u8>(), std::mem::size_of_val(values)) }
    }
}

impl Elem for f64 {
    const KIND: Kind = Kind::F64;
    fn rows(buf: &mut Rows) -> Option<&mut Vec<Self>> {
        match buf {
            Rows::F64(v) => Some(v),
            Rows::I32(_) => None,
        }
    }
}

impl Elem for i32 {
    const KIND: Kind = Kind::I32;
    fn rows(buf: &mut Rows) -> Option<&mut Vec<Self>> {
        match buf {
            Rows::I32(v) => Some(v),
            Rows::F64(_) => None,
        }
    }
}

/// Append state of a variable along the unlimited dimension.
struct Record {
    /// Values per record (product of the fixed dimensions).
    row_len: usize,
    /// Records per chunk.
    chunk_rows: usize,
    /// Chunks buffered before they are compressed and written together.
    batch_chunks: usize,
    /// Index of the first buffered record, a multiple of `chunk_rows`: the buffer always
    /// starts at a chunk boundary, and after a [`Var::flush`] it keeps the records of a partly
    /// filled last chunk (already in the file) so that the whole chunk is written once full.
    buf_start: usize,
    /// Buffered records, row-major.
    buf: Rows,
}

impl Record {
    /// Records the buffer holds when a batch is complete.
    fn batch_rows(&self) -> usize {
        self.batch_chunks * self.chunk_rows
    }
}

struct Var {
    dataset: Dataset,
    kind: Kind,
    /// Current shape in the file; for a record variable `shape[0]` counts written records.
    shape: Vec<usize>,
    record: Option<Record>,
    /// Records per chunk of a chunked fixed-size variable (`None`: contiguous or scalar).
    fixed_chunk_rows: Option<usize>,
}

impl Var {
    /// Refuses values of the wrong element type.
    fn check_kind<T: Elem>(&self, path: &Path, full: &str) -> Result<(), OutputError> {
        if self.kind == T::KIND {
            return Ok(());
        }
        Err(OutputError::Layout {
            path: path.to_path_buf(),
            variable: full.to_owned(),
            reason: format!("holds {} values, not {}", self.kind.name(), T::KIND.name()),
        })
    }

    /// Writes the buffered records that are not yet in the file, including a partly filled last
    /// chunk (padded; the padding lies beyond the extent, where no reader looks). Full chunks
    /// leave the buffer; the records of a partial one stay so that the chunk is rewritten
    /// whole when it fills.
    fn flush(&mut self, packer: &mut Packer) -> hdf5::Result<()> {
        let Some(rec) = self.record.as_mut() else {
            return Ok(());
        };
        match &mut rec.buf {
            Rows::F64(b) => flush_rows(
                &self.dataset,
                &mut self.shape,
                packer,
                rec.row_len,
                rec.chunk_rows,
                &mut rec.buf_start,
                b,
            ),
            Rows::I32(b) => flush_rows(
                &self.dataset,
                &mut self.shape,
                packer,
                rec.row_len,
                rec.chunk_rows,
                &mut rec.buf_start,
                b,
            ),
        }
    }

    /// Appends whole records (`values.len()` a multiple of the record length), writing each
    /// batch of chunks as it fills. Allocates nothing: the buffer holds one batch.
    fn push_rows<T: Elem>(&mut self, packer: &mut Packer, mut values: &[T]) -> hdf5::Result<()> {
        let Some(rec) = self.record.as_mut() else {
            return Ok(());
        };
        let batch_values = rec.batch_rows() * rec.row_len;
        while !values.is_empty() {
            let Some(buf) = T::rows(&mut rec.buf) else {
                return Ok(()); // unreachable: the kind was checked by the caller
            };
            let take = (batch_values - buf.len()).min(values.len());
            buf.extend_from_slice(&values[..take]);
            values = &values[take..];
            if buf.len() == batch_values {
                flush_rows(
                    &self.dataset,
                    &mut self.shape,
                    packer,
                    rec.row_len,
                    rec.chunk_rows,
                    &mut rec.buf_start,
                    buf,
                )?;
            }
        }
        Ok(())
    }
}

/// See [`Var::flush`]: `buf` holds whole records from record `*buf_start` on, of which the
/// first `shape[0] - *buf_start` are already in the file.
fn flush_rows<T: Elem>(
    dataset: &Dataset,
    shape: &mut [usize],
    packer: &mut Packer,
    row_len: usize,
    chunk_rows: usize,
    buf_start: &mut usize,
    buf: &mut Vec<T>,
) -> hdf5::Result<()> {
    let rows = buf.len() / row_len;
    let end = *buf_start + rows;
    if end > shape[0] {
        let mut new_shape = shape.to_vec();
        new_shape[0] = end;
        dataset.resize(new_shape)?;
        packer.write_chunks(dataset, *buf_start, chunk_rows, row_len, buf)?;
        shape[0] = end;
    }
    let full = rows / chunk_rows * chunk_rows;
    buf.copy_within(full * row_len.., 0);
    buf.truncate((rows - full) * row_len);
    *buf_start += full;
    Ok(())
}

/// Compresses chunks as the dataset's filters would and writes them with HDF5's direct chunk
/// write; one per file, its buffers grow to the largest batch and are then reused.
struct Packer {
    /// zlib deflate level; 0 means the datasets have no filters (chunks are stored raw).
    level: u8,
    /// One libdeflate compressor per worker thread, made on first use.
    compressors: Vec<Compressor>,
    /// Shuffled (or raw, at level 0) chunks of the batch, each padded to the chunk size.
    shuffled: Vec<u8>,
    /// Compressed chunks, each in a slot of the compressor's bound.
    packed: Vec<u8>,
    /// Compressed size of each chunk of the batch.
    sizes: Vec<usize>,
}

impl Packer {
    fn new(level: u8) -> Packer {
        Packer {
            level,
            compressors: Vec::new(),
            shuffled: Vec::new(),
            packed: Vec::new(),
            sizes: Vec::new(),
        }
    }

    /// Writes `data` (whole records of `row_len` values, row-major) as the chunks of
    /// `chunk_rows` records that start at record `first_row` (a multiple of `chunk_rows`) of
    /// `dataset`, whose extent must already cover them. A last partial chunk is padded with
    /// zeros. Chunks are compressed in batches of at most [`MAX_BATCH_CHUNKS`], in parallel.
    fn write_chunks<T: Elem>(
        &mut self,
        dataset: &Dataset,
        first_row: usize,
        chunk_rows: usize,
        row_len: usize,
        data: &[T],
    ) -> hdf5::Result<()> {
        let bytes = T::bytes(data);
        let elem = std::mem::size_of::<T>();
        let chunk_bytes = chunk_rows * row_len * elem;
        if bytes.is_empty() || chunk_bytes == 0 {
            return Ok(());
        }
        let per_batch = batch_chunks(chunk_bytes);
        for (b, batch) in bytes.chunks(per_batch * chunk_bytes).enumerate() {
            let n = batch.len().div_ceil(chunk_bytes);
            let bound = self.pack(batch, n, chunk_bytes, elem)?;
            for (k, &size) in self.sizes.iter().enumerate() {
                let row = first_row + (b * per_batch + k) * chunk_rows;
                let mut offset = [0u64; 32];
                offset[0] = row as u64;
                let ptr = if self.level == 0 {
                    self.shuffled[k * chunk_bytes..].as_ptr()
                } else {
                    self.packed[k * bound..].as_ptr()
                };
                // SAFETY: a valid dataset id, an offset array of HDF5's largest rank (32), and
                // `size` readable bytes at `ptr`; the library lock is held while HDF5's error
                // stack is read (it names the cause, e.g. a full disk).
                hdf5::sync::sync(|| {
                    hdf5::h5check(unsafe {
                        hdf5_sys::h5d::H5Dwrite_chunk(
                            dataset.id(),
                            hdf5_sys::h5p::H5P_DEFAULT,
                            0,
                            offset.as_ptr(),
                            size,
                            ptr.cast(),
                        )
                    })
                })?;
            }
        }
        Ok(())
    }

    /// Shuffles and compresses the `n` chunks of `batch` (the last may be short) into the
    /// packer's buffers: chunk `k` is at `shuffled[k * chunk_bytes..]` (level 0) or at
    /// `packed[k * stride..]`, of `sizes[k]` bytes; returns the stride.
    fn pack(&mut self, batch: &[u8], n: usize, chunk_bytes: usize, elem: usize) -> hdf5::Result<usize> {
        if self.shuffled.len() < n * chunk_bytes {
            self.shuffled.resize(n * chunk_bytes, 0);
        }
        self.sizes.clear();
        self.sizes.resize(n, chunk_bytes);
        let shuffled = &mut self.shuffled[..n * chunk_bytes];
        if self.level == 0 {
            // No filters: the chunk is stored as it is, padded.
            shuffled[..batch.len()].copy_from_slice(batch);
            shuffled[batch.len()..].fill(0);
            return Ok(chunk_bytes);
        }
        if self.compressors.is_empty() {
            let level = CompressionLvl::new(i32::from(self.level))
                .map_err(|_| hdf5::Error::from(format!("deflate level {} out of range", self.level)))?;
            let workers = rayon::current_num_threads().max(1);
            self.compressors = (0..workers).map(|_| Compressor::new(level)).collect();
        }
        let bound = self.compressors[0].zlib_compress_bound(chunk_bytes);
        if self.packed.len() < n * bound {
            self.packed.resize(n * bound, 0);
        }
        let packed = &mut self.packed[..n * bound];
        let sizes = &mut self.sizes[..n];
        // Each worker takes a run of consecutive chunks with its own compressor.
        let workers = self.compressors.len().min(n);
        let per = n.div_ceil(workers);
        let work = |(((c, sh), pk), sz): (((&mut Compressor, &mut [u8]), &mut [u8]), &mut [usize]),
                    first: usize| {
            for (k, size) in sz.iter_mut().enumerate() {
                let start = (first + k) * chunk_bytes;
                let src = &batch[start.min(batch.len())..(start + chunk_bytes).min(batch.len())];
                let dst = &mut sh[k * chunk_bytes..(k + 1) * chunk_bytes];
                shuffle(src, elem, dst);
                *size = c
                    .zlib_compress(dst, &mut pk[k * bound..(k + 1) * bound])
                    .unwrap_or(0);
            }
        };
        if workers == 1 {
            work((((&mut self.compressors[0], shuffled), packed), sizes), 0);
        } else {
            self.compressors[..workers]
                .par_iter_mut()
                .zip(shuffled.par_chunks_mut(per * chunk_bytes))
                .zip(packed.par_chunks_mut(per * bound))
                .zip(sizes.par_chunks_mut(per))
                .enumerate()
                .for_each(|(w, parts)| work(parts, w * per));
        }
        if self.sizes.contains(&0) {
            // Cannot happen: each slot holds libdeflate's bound for the chunk size.
            return Err(hdf5::Error::from("deflate ran out of room for a chunk"));
        }
        Ok(bound)
    }
}

/// HDF5's shuffle filter (H5Z_FILTER_SHUFFLE) on one chunk: byte `j` of element `i` goes to
/// `out[j * count + i]`, where `count = out.len() / elem`. `src` may be shorter than `out`
/// (a partial last chunk); the missing elements are zeros.
fn shuffle(src: &[u8], elem: usize, out: &mut [u8]) {
    match elem {
        8 => shuffle_n::<8>(src, out),
        4 => shuffle_n::<4>(src, out),
        _ => {
            out[..src.len()].copy_from_slice(src);
            out[src.len()..].fill(0);
        }
    }
}

fn shuffle_n<const S: usize>(src: &[u8], out: &mut [u8]) {
    let count = out.len() / S;
    let have = src.len() / S;
    // Eight 8-byte elements at a time: an 8 x 8 byte transpose in registers, then one 8-byte
    // store per byte plane.
    let mut done = 0;
    if S == 8 {
        for (b, block) in src.chunks_exact(64).enumerate() {
            let planes = transpose8(block);
            for (j, plane) in planes.iter().enumerate() {
                let at = j * count + b * 8;
                out[at..at + 8].copy_from_slice(&plane.to_le_bytes());
            }
            done = (b + 1) * 8;
        }
    }
    for (i, e) in src.chunks_exact(S).enumerate().skip(done) {
        for (j, &byte) in e.iter().enumerate() {
            out[j * count + i] = byte;
        }
    }
    for j in 0..S {
        out[j * count + have..(j + 1) * count].fill(0);
    }
}

/// The 8 x 8 byte matrix of eight little-endian 8-byte elements, transposed: word `j` holds
/// byte `j` of elements 0 to 7 (in its bytes 0 to 7). Three rounds of block swaps (4 x 4,
/// 2 x 2, 1 x 1 bytes).
fn transpose8(block: &[u8]) -> [u64; 8] {
    let mut a = [0u64; 8];
    for (r, e) in block.chunks_exact(8).enumerate() {
        a[r] = u64::from_le_bytes([e[0], e[1], e[2], e[3], e[4], e[5], e[6], e[7]]);
    }
    for r in 0..4 {
        let t = ((a[r] >> 32) ^ a[r + 4]) & 0x0000_0000_FFFF_FFFF;
        a[r] ^= t << 32;
        a[r + 4] ^= t;
    }
    for r in [0, 1, 4, 5] {
        let t = ((a[r] >> 16) ^ a[r + 2]) & 0x0000_FFFF_0000_FFFF;
        a[r] ^= t << 16;
        a[r + 2] ^= t;
    }
    for r in [0, 2, 4, 6] {
        let t = ((a[r] >> 8) ^ a[r + 1]) & 0x00FF_00FF_00FF_00FF;
        a[r] ^= t << 8;
        a[r + 1] ^= t;
    }
    a
}

struct Dim {
    dataset: Dataset,
    len: usize,
    unlimited: bool,
}

/// Open file and bookkeeping; shared by the writer and its group handles.
struct Inner {
    /// Variables by full path ("/lat", "/run/time").
    vars: HashMap<String, Var>,
    /// Dimensions by full path.
    dims: HashMap<String, Dim>,
    /// Declared after the dataset handles so that it is closed last.
    file: File,
    /// The target path, for messages.
    path: PathBuf,
    /// Filters of chunked variables (shuffle + deflate, or none at level 0).
    filters: Vec<Filter>,
    /// Compresses and writes chunks.
    packer: Packer,
    /// Scratch for the full path of the variable an append goes to.
    key: String,
}

/// Deletes the temporary file when dropped, unless disarmed after the final rename.
struct TempFile {
    path: PathBuf,
    armed: bool,
    /// Whether the final rename may replace an existing target ([`forbid_replacing`]).
    replace: bool,
}

/// Targets this process must not replace (absolute paths), see [`forbid_replacing`].
static NO_REPLACE: std::sync::Mutex<Vec<PathBuf>> = std::sync::Mutex::new(Vec::new());

/// `path` made absolute (against the working directory) for comparing targets.
fn absolute(path: &Path) -> PathBuf {
    std::path::absolute(path).unwrap_or_else(|_| path.to_path_buf())
}

/// Makes writers created afterwards for `target` refuse, at [`NcWriter::finish`], to replace a
/// file there, even one that appeared while the job ran (another process writing the same
/// file). The command line calls it for every output written without `--overwrite` (other
/// than a resumed job's incomplete output); library callers replace by default.
pub fn forbid_replacing(target: &Path) {
    let abs = absolute(target);
    let mut list = NO_REPLACE.lock().unwrap_or_else(|e| e.into_inner());
    if !list.contains(&abs) {
        list.push(abs);
    }
}

/// Whether [`forbid_replacing`] was called for `target`.
fn may_replace(target: &Path) -> bool {
    let abs = absolute(target);
    !NO_REPLACE
        .lock()
        .unwrap_or_else(|e| e.into_inner())
        .contains(&abs)
}

/// Renames `from` to `to` unless `to` exists (error kind `AlreadyExists`), atomically where
/// the system allows: Linux `renameat2(RENAME_NOREPLACE)`; where the file system does not
/// support that flag, a hard link (which refuses an existing name) and then removal of `from`;
/// where hard links are not supported either (e.g. FAT), a check that `to` is absent just
/// before a plain rename, which leaves a window of microseconds for another writer.
fn rename_no_replace(from: &Path, to: &Path) -> std::io::Result<()> {
    #[cfg(target_os = "linux")]
    {
        use std::os::unix::ffi::OsStrExt;
        let c = |p: &Path| std::ffi::CString::new(p.as_os_str().as_bytes()).map_err(std::io::Error::other);
        let (f, t) = (c(from)?, c(to)?);
        // SAFETY: two NUL-terminated paths that live across the call; no memory is shared.
        let r = unsafe {
            libc::syscall(
                libc::SYS_renameat2,
                libc::AT_FDCWD,
                f.as_ptr(),
                libc::AT_FDCWD,
                t.as_ptr(),
                libc::RENAME_NOREPLACE,
            )
        };
        if r == 0 {
            return Ok(());
        }
        let e = std::io::Error::last_os_error();
        // EINVAL/ENOTSUP: the file system lacks the flag; ENOSYS: the kernel is older than 3.15.
        if !matches!(
            e.raw_os_error(),
            Some(libc::EINVAL | libc::ENOSYS | libc::EOPNOTSUPP)
        ) {
            return Err(e);
        }
    }
    rename_by_link(from, to)
}

/// The fallback of [`rename_no_replace`]: a hard link (refused for an existing name), then
/// removal of `from`; without hard links, a check for `to` just before a plain rename.
fn rename_by_link(from: &Path, to: &Path) -> std::io::Result<()> {
    match std::fs::hard_link(from, to) {
        Ok(()) => {
            // The result is in place; a temporary name left behind is only untidy.
            let _ = std::fs::remove_file(from);
            Ok(())
        }
        Err(e) if e.kind() == std::io::ErrorKind::AlreadyExists => Err(e),
        Err(_) => {
            if std::fs::symlink_metadata(to).is_ok() {
                return Err(std::io::ErrorKind::AlreadyExists.into());
            }
            std::fs::rename(from, to)
        }
    }
}

/// Moves the finished temporary file `temp` of `target` to a free visible name beside it,
/// `<stem>.kept-<pid>[-n].<ext>`; `None` (and the file is deleted with the writer) if that fails.
fn keep_aside(temp: &Path, target: &Path) -> Option<PathBuf> {
    let stem = target.file_stem()?.to_string_lossy().into_owned();
    let ext = target
        .extension()
        .map(|e| format!(".{}", e.to_string_lossy()))
        .unwrap_or_default();
    let pid = std::process::id();
    (0..100).find_map(|n| {
        let suffix = if n == 0 { String::new() } else { format!("-{n}") };
        let name = target.with_file_name(format!("{stem}.kept-{pid}{suffix}{ext}"));
        rename_no_replace(temp, &name).ok().map(|()| name)
    })
}

impl Drop for TempFile {
    fn drop(&mut self) {
        if self.armed {
            // Best effort: the file may never have been created.
            let _ = std::fs::remove_file(&self.path);
        }
    }
}

/// Writer of one netCDF-4-compatible HDF5 file.
///
/// Data go to a temporary file `.<name>.partial-<pid>-<n>` in the target's directory;
/// [`finish`](Self::finish) renames it onto the target, while [`abandon`](Self::abandon) or
/// dropping the writer deletes it. The methods that define and write content also exist on
/// [`NcGroup`] for sub-groups.
pub struct NcWriter {
    inner: Inner,
    temp: TempFile,
}

/// A group of an [`NcWriter`]'s file, with the same content methods as the writer. Dimensions
/// defined in the group or any parent group can be used by its variables.
pub struct NcGroup<'w> {
    inner: &'w mut Inner,
    path: String,
}

/// The definition and write methods shared by [`NcWriter`] (root group) and [`NcGroup`].
macro_rules! content_methods {
    () => {
        /// Sets an attribute of this group (the file's global attributes for the writer) to a
        /// variable-length UTF-8 string, replacing any earlier value.
        pub fn set_attr_str(&mut self, name: &str, value: &str) -> Result<(), OutputError> {
            let (inner, group) = self.scope();
            inner.set_attr(group, None, name, &Attr::Str(value.to_owned()))
        }

        /// Sets a group attribute to a scalar `f64`.
        pub fn set_attr_f64(&mut self, name: &str, value: f64) -> Result<(), OutputError> {
            let (inner, group) = self.scope();
            inner.set_attr(group, None, name, &Attr::F64(value))
        }

        /// Sets a group attribute to a scalar `i64`.
        pub fn set_attr_i64(&mut self, name: &str, value: i64) -> Result<(), OutputError> {
            let (inner, group) = self.scope();
            inner.set_attr(group, None, name, &Attr::I64(value))
        }

        /// Sets a group attribute to any [`Attr`] value.
        pub fn set_attr(&mut self, name: &str, value: &Attr) -> Result<(), OutputError> {
            let (inner, group) = self.scope();
            inner.set_attr(group, None, name, value)
        }

        /// Sets a string attribute of variable `var`.
        pub fn set_var_attr_str(&mut self, var: &str, name: &str, value: &str) -> Result<(), OutputError> {
            let (inner, group) = self.scope();
            inner.set_attr(group, Some(var), name, &Attr::Str(value.to_owned()))
        }

        /// Sets an `f64` attribute of variable `var`.
        pub fn set_var_attr_f64(&mut self, var: &str, name: &str, value: f64) -> Result<(), OutputError> {
            let (inner, group) = self.scope();
            inner.set_attr(group, Some(var), name, &Attr::F64(value))
        }

        /// Sets an `i64` attribute of variable `var`.
        pub fn set_var_attr_i64(&mut self, var: &str, name: &str, value: i64) -> Result<(), OutputError> {
            let (inner, group) = self.scope();
            inner.set_attr(group, Some(var), name, &Attr::I64(value))
        }

        /// Defines a fixed-size dimension `name` of length `values.len()` together with its
        /// coordinate variable (`f64`, a dimension scale) holding `values`.
        pub fn add_coordinate(
            &mut self,
            name: &str,
            values: &[f64],
            attrs: &[(&str, Attr)],
        ) -> Result<(), OutputError> {
            let (inner, group) = self.scope();
            inner.add_coordinate(group, name, values, attrs)
        }

        /// Defines a fixed-size dimension without a coordinate variable (e.g. `bnds` of length
        /// 2). Length 0 is allowed.
        pub fn add_dimension(&mut self, name: &str, len: usize) -> Result<(), OutputError> {
            let (inner, group) = self.scope();
            inner.add_dimension(group, name, len)
        }

        /// Defines an unlimited dimension `name` with an `f64` coordinate variable that starts
        /// empty and grows by [`append_coordinate`](Self::append_coordinate).
        pub fn add_unlimited_coordinate(
            &mut self,
            name: &str,
            attrs: &[(&str, Attr)],
        ) -> Result<(), OutputError> {
            let (inner, group) = self.scope();
            inner.add_unlimited_coordinate(group, name, attrs)
        }

        /// Defines an `f64` variable over the named dimensions (first dimension may be
        /// unlimited, making it a record variable). An empty `dims` makes a scalar.
        pub fn add_variable_f64(
            &mut self,
            name: &str,
            dims: &[&str],
            attrs: &[(&str, Attr)],
        ) -> Result<(), OutputError> {
            let (inner, group) = self.scope();
            inner.add_variable::<f64>(group, name, dims, attrs)
        }

        /// Defines an `i32` variable; see [`add_variable_f64`](Self::add_variable_f64).
        pub fn add_variable_i32(
            &mut self,
            name: &str,
            dims: &[&str],
            attrs: &[(&str, Attr)],
        ) -> Result<(), OutputError> {
            let (inner, group) = self.scope();
            inner.add_variable::<i32>(group, name, dims, attrs)
        }

        /// Writes all values of an `f64` variable, row-major. On a record variable the values
        /// are appended as whole records (their count must be a multiple of the record length).
        pub fn write_f64(&mut self, name: &str, values: &[f64]) -> Result<(), OutputError> {
            let (inner, group) = self.scope();
            inner.write(group, name, values)
        }

        /// Writes all values of an `i32` variable; see [`write_f64`](Self::write_f64).
        pub fn write_i32(&mut self, name: &str, values: &[i32]) -> Result<(), OutputError> {
            let (inner, group) = self.scope();
            inner.write(group, name, values)
        }

        /// Appends one record (all values at one step of the unlimited dimension, row-major)
        /// to an `f64` record variable. Records are buffered up to one chunk.
        pub fn append_row_f64(&mut self, name: &str, row: &[f64]) -> Result<(), OutputError> {
            let (inner, group) = self.scope();
            inner.append(group, name, row)
        }

        /// Appends one record to an `i32` record variable.
        pub fn append_row_i32(&mut self, name: &str, row: &[i32]) -> Result<(), OutputError> {
            let (inner, group) = self.scope();
            inner.append(group, name, row)
        }

        /// Appends one value to the coordinate variable of an unlimited dimension.
        pub fn append_coordinate(&mut self, name: &str, value: f64) -> Result<(), OutputError> {
            let (inner, group) = self.scope();
            inner.append(group, name, &[value])
        }

        /// Opens the sub-group `name`, creating it on first use.
        pub fn group(&mut self, name: &str) -> Result<NcGroup<'_>, OutputError> {
            let (inner, parent) = self.scope();
            let path = inner.open_group(parent, name)?;
            Ok(NcGroup { inner, path })
        }
    };
}

impl NcWriter {
    /// Starts writing `target` with deflate level [`DEFAULT_DEFLATE_LEVEL`]. The file appears
    /// at `target` only after [`finish`](Self::finish).
    ///
    /// # Errors
    /// [`OutputError::NoDirectory`] if the target's directory does not exist,
    /// [`OutputError::Create`] if HDF5 cannot create the temporary file (e.g. not writable).
    pub fn create(target: &Path) -> Result<NcWriter, OutputError> {
        Self::create_with_deflate(target, DEFAULT_DEFLATE_LEVEL)
    }

    /// Starts writing `target` with zlib deflate `level` (0 to [`MAX_DEFLATE_LEVEL`]) for its
    /// record variables and large fixed-size variables, each after the shuffle filter. Level 0
    /// stores them without filters: record variables stay chunked (appendable along the
    /// unlimited dimension), fixed-size ones are contiguous.
    ///
    /// # Errors
    /// [`OutputError::DeflateLevel`] for a level above [`MAX_DEFLATE_LEVEL`], otherwise as
    /// [`create`](Self::create).
    pub fn create_with_deflate(target: &Path, level: u8) -> Result<NcWriter, OutputError> {
        if level > MAX_DEFLATE_LEVEL {
            return Err(OutputError::DeflateLevel {
                path: target.to_path_buf(),
                level,
            });
        }
        if memory::is_target(target) {
            return Self::create_in_memory(target, level);
        }
        let dir = match target.parent() {
            Some(d) if !d.as_os_str().is_empty() => d,
            _ => Path::new("."),
        };
        if !dir.is_dir() {
            return Err(OutputError::NoDirectory {
                path: target.to_path_buf(),
                dir: dir.to_path_buf(),
                problem: if dir.exists() {
                    "is a file, not a directory"
                } else {
                    "does not exist"
                },
            });
        }
        let Some(file_name) = target.file_name() else {
            return Err(OutputError::InvalidName {
                path: target.to_path_buf(),
                name: target.display().to_string(),
                reason: "the output path has no file name",
            });
        };
        let temp_path = dir.join(format!(
            ".{}.partial-{}-{}",
            file_name.to_string_lossy(),
            std::process::id(),
            TEMP_SEQ.fetch_add(1, Ordering::Relaxed)
        ));
        // Armed before creation so that anything HDF5 leaves behind on failure is removed.
        let temp = TempFile {
            path: temp_path,
            armed: true,
            replace: may_replace(target),
        };
        let file = File::with_options()
            .with_fapl(|p| p.libver_v18())
            .with_fcpl(|p| {
                p.link_creation_order(LinkCreationOrder::Indexed)
                    .attr_creation_order(AttrCreationOrder::Indexed)
            })
            .create(&temp.path)
            .map_err(|source| OutputError::Create {
                path: target.to_path_buf(),
                temp: temp.path.clone(),
                source,
            })?;
        super::close_on_exec(&file);
        Ok(NcWriter {
            inner: Inner::new(file, target, level),
            temp,
        })
    }

    /// The target path given to [`create`](Self::create).
    pub fn target(&self) -> &Path {
        &self.inner.path
    }

    /// The temporary file being written until [`finish`](Self::finish).
    pub fn temp_path(&self) -> &Path {
        &self.temp.path
    }

    /// Writes all buffered records and flushes the file to disk, so that the temporary file is a
    /// complete, readable netCDF file at this point even if the process is killed afterwards.
    ///
    /// Each call rewrites the partly filled last chunk of every record variable; call it at
    /// checkpoints, not after every record.
    pub fn flush(&mut self) -> Result<(), OutputError> {
        self.inner.flush_all()
    }

    /// Writes buffered records, closes the file and renames it onto the target, atomically
    /// replacing an existing file unless [`forbid_replacing`] was called for the target before
    /// [`create`](Self::create): then the rename refuses an existing file even when it
    /// appeared while this writer ran (another process writing the same file), and the result
    /// is kept under the name [`OutputError::Exists`] reports. On other errors the temporary
    /// file is deleted.
    pub fn finish(self) -> Result<(), OutputError> {
        let NcWriter { mut inner, mut temp } = self;
        inner.flush_all()?;
        let Inner {
            vars,
            dims,
            file,
            path,
            ..
        } = inner;
        drop(vars);
        drop(dims);
        if memory::is_target(&path) {
            return memory::keep_image(file, path);
        }
        file.close().map_err(|source| OutputError::Hdf5 {
            path: path.clone(),
            object: "closing the file".to_owned(),
            source,
        })?;
        let renamed = if temp.replace {
            std::fs::rename(&temp.path, &path)
        } else {
            rename_no_replace(&temp.path, &path)
        };
        match renamed {
            Ok(()) => {
                temp.armed = false;
                Ok(())
            }
            Err(e) if e.kind() == std::io::ErrorKind::AlreadyExists => {
                // Another writer finished first: its file stays, ours is kept beside it.
                let kept = keep_aside(&temp.path, &path);
                if kept.is_some() {
                    temp.armed = false;
                }
                Err(OutputError::Exists { path, kept })
            }
            Err(source) => Err(OutputError::Rename {
                path: path.clone(),
                temp: temp.path.clone(),
                source,
            }),
        }
    }

    /// Closes and deletes the temporary file; nothing is written at the target. Dropping the
    /// writer without [`finish`](Self::finish) does the same.
    pub fn abandon(self) {
        drop(self);
    }

    /// The root group as seen by the shared content methods.
    fn scope(&mut self) -> (&mut Inner, &str) {
        (&mut self.inner, "/")
    }

    content_methods!();
}

impl NcGroup<'_> {
    /// Full HDF5 path of this group, e.g. `/run`.
    pub fn path(&self) -> &str {
        &self.path
    }

    fn scope(&mut self) -> (&mut Inner, &str) {
        (&mut *self.inner, self.path.as_str())
    }

    content_methods!();
}

/// `parent/name` as an absolute HDF5 path.
fn join(parent: &str, name: &str) -> String {
    if parent == "/" {
        format!("/{name}")
    } else {
        format!("{parent}/{name}")
    }
}

/// The group containing `path`, or `None` for the root.
fn parent_of(path: &str) -> Option<&str> {
    if path == "/" {
        return None;
    }
    match path.rfind('/') {
        Some(0) => Some("/"),
        Some(i) => Some(&path[..i]),
        None => None,
    }
}

/// Records per chunk for records of `row_len` values: [`RECORD_CHUNK_ROWS`], or more for short
/// records so that a chunk is not tiny.
fn record_chunk_rows(row_len: usize) -> usize {
    RECORD_CHUNK_ROWS.max(RECORD_CHUNK_MIN_VALUES / row_len.max(1))
}

/// Chunks of `chunk_bytes` raw bytes gathered in one batch of a record variable: about
/// [`BATCH_BYTES`], at most [`MAX_BATCH_CHUNKS`].
fn batch_chunks(chunk_bytes: usize) -> usize {
    (BATCH_BYTES / chunk_bytes.max(1)).clamp(1, MAX_BATCH_CHUNKS)
}

/// Chunk shape for a fixed-size variable: the whole shape, with the first axis cut so that a
/// chunk holds at most [`MAX_CHUNK_VALUES`].
fn fixed_chunk(shape: &[usize]) -> Vec<usize> {
    let mut chunk = shape.to_vec();
    let rest: usize = shape[1..].iter().product();
    chunk[0] = shape[0].min((MAX_CHUNK_VALUES / rest.max(1)).max(1));
    chunk
}

/// Writes a scalar attribute on `loc`, replacing an existing one of the same name.
fn write_attr(loc: &Location, name: &str, value: &Attr) -> hdf5::Result<()> {
    // One lookup by name (listing every attribute's name made each new attribute cost more).
    let c = CString::new(name).map_err(|e| hdf5::Error::from(e.to_string()))?;
    // SAFETY: a valid object id and a NUL-terminated name; the library lock is held.
    let exists = hdf5::sync::sync(|| unsafe { hdf5_sys::h5a::H5Aexists(loc.id(), c.as_ptr()) });
    if exists < 0 {
        return Err(hdf5::Error::from(format!("cannot look up attribute `{name}`")));
    }
    if exists > 0 {
        loc.delete_attr(name)?;
    }
    match value {
        Attr::Str(s) => {
            let v = VarLenUnicode::from_str(s).map_err(|e| hdf5::Error::from(e.to_string()))?;
            loc.new_attr::<VarLenUnicode>()
                .shape(())
                .create(name)?
                .write_scalar(&v)
        }
        Attr::F64(x) => loc.new_attr::<f64>().shape(()).create(name)?.write_scalar(x),
        Attr::I64(x) => loc.new_attr::<i64>().shape(()).create(name)?.write_scalar(x),
    }
}

impl Inner {
    /// A freshly created `file` for `target`, its chunked variables deflated at `level`
    /// (shuffle + deflate, or no filters at level 0).
    fn new(file: File, target: &Path, level: u8) -> Inner {
        Inner {
            vars: HashMap::new(),
            dims: HashMap::new(),
            file,
            path: target.to_path_buf(),
            filters: if level == 0 {
                Vec::new()
            } else {
                vec![Filter::shuffle(), Filter::deflate(level)]
            },
            packer: Packer::new(level),
            key: String::new(),
        }
    }

    fn h5err(&self, object: String) -> impl FnOnce(hdf5::Error) -> OutputError + '_ {
        move |source| OutputError::Hdf5 {
            path: self.path.clone(),
            object,
            source,
        }
    }

    fn check_name(&self, name: &str) -> Result<(), OutputError> {
        let reason = if name.is_empty() {
            "names must not be empty"
        } else if name.contains('/') {
            "names must not contain '/'"
        } else if name.contains('\0') {
            "names must not contain NUL"
        } else if name == "." || name == ".." {
            "names must not be '.' or '..'"
        } else {
            return Ok(());
        };
        Err(OutputError::InvalidName {
            path: self.path.clone(),
            name: name.to_owned(),
            reason,
        })
    }

    /// Checks that `name` is a valid, unused name in `group` and returns its full path.
    fn new_object(&self, group: &str, name: &str) -> Result<String, OutputError> {
        self.check_name(name)?;
        let full = join(group, name);
        let g = self
            .file
            .group(group)
            .map_err(self.h5err(format!("group `{group}`")))?;
        if self.vars.contains_key(&full) || self.dims.contains_key(&full) || g.link_exists(name) {
            return Err(OutputError::InvalidName {
                path: self.path.clone(),
                name: full,
                reason: "the name is already used in this group",
            });
        }
        Ok(full)
    }

    fn var_mut(&mut self, group: &str, name: &str) -> Result<&mut Var, OutputError> {
        let full = join(group, name);
        match self.vars.get_mut(&full) {
            Some(v) => Ok(v),
            None => Err(OutputError::UnknownVariable {
                path: self.path.clone(),
                variable: full,
            }),
        }
    }

    /// Finds dimension `name` in `group` or the nearest parent group that defines it.
    fn find_dim(&self, group: &str, name: &str) -> Option<&Dim> {
        let mut g = Some(group);
        while let Some(cur) = g {
            if let Some(d) = self.dims.get(&join(cur, name)) {
                return Some(d);
            }
            g = parent_of(cur);
        }
        None
    }

    fn set_scale(&self, dataset: &Dataset, var: &str, scale_name: &str) -> Result<(), OutputError> {
        let fail = || OutputError::Scale {
            path: self.path.clone(),
            variable: var.to_owned(),
            dimension: var.to_owned(),
            action: "create",
        };
        let c = CString::new(scale_name).map_err(|_| fail())?;
        // SAFETY: a valid dataset id and a NUL-terminated name; the library lock is held.
        let rc = hdf5::sync::sync(|| unsafe { ds::H5DSset_scale(dataset.id(), c.as_ptr()) });
        if rc < 0 {
            return Err(fail());
        }
        Ok(())
    }

    fn set_attr(
        &mut self,
        group: &str,
        var: Option<&str>,
        name: &str,
        value: &Attr,
    ) -> Result<(), OutputError> {
        self.check_name(name)?;
        let (object, loc): (String, Location) = match var {
            Some(v) => {
                let full = join(group, v);
                let ds = self.var_mut(group, v)?.dataset.clone();
                (format!("variable `{full}`"), (**ds).clone())
            }
            None => {
                let g = self
                    .file
                    .group(group)
                    .map_err(self.h5err(format!("group `{group}`")))?;
                (format!("group `{group}`"), (*g).clone())
            }
        };
        if let Attr::Str(s) = value {
            if s.contains('\0') {
                return Err(OutputError::NulInString {
                    path: self.path.clone(),
                    object,
                    attribute: name.to_owned(),
                });
            }
        }
        write_attr(&loc, name, value).map_err(self.h5err(format!("{object}, attribute `{name}`")))
    }

    fn set_attrs(&mut self, group: &str, var: &str, attrs: &[(&str, Attr)]) -> Result<(), OutputError> {
        for (name, value) in attrs {
            self.set_attr(group, Some(var), name, value)?;
        }
        Ok(())
    }

    fn add_coordinate(
        &mut self,
        group: &str,
        name: &str,
        values: &[f64],
        attrs: &[(&str, Attr)],
    ) -> Result<(), OutputError> {
        let full = self.new_object(group, name)?;
        let fixed_chunk_rows = (values.len() >= COMPRESS_MIN_VALUES && !self.filters.is_empty())
            .then(|| fixed_chunk(&[values.len()])[0]);
        let mut create = || -> hdf5::Result<Dataset> {
            let g = self.file.group(group)?;
            let mut b = g
                .new_dataset::<f64>()
                .shape(values.len())
                .attr_creation_order(AttrCreationOrder::Indexed);
            if let Some(rows) = fixed_chunk_rows {
                b = b.chunk(vec![rows]).set_filters(&self.filters);
            }
            let d = b.create(name)?;
            match fixed_chunk_rows {
                Some(rows) => self.packer.write_chunks(&d, 0, rows, 1, values)?,
                None if !values.is_empty() => d.write_raw(values)?,
                None => {}
            }
            Ok(d)
        };
        let dataset = create().map_err(|source| OutputError::Hdf5 {
            path: self.path.clone(),
            object: format!("coordinate `{full}`"),
            source,
        })?;
        self.set_scale(&dataset, &full, name)?;
        let dim = Dim {
            dataset: dataset.clone(),
            len: values.len(),
            unlimited: false,
        };
        self.dims.insert(full.clone(), dim);
        let var = Var {
            dataset,
            kind: Kind::F64,
            shape: vec![values.len()],
            record: None,
            fixed_chunk_rows,
        };
        self.vars.insert(full, var);
        self.set_attrs(group, name, attrs)
    }

    fn add_dimension(&mut self, group: &str, name: &str, len: usize) -> Result<(), OutputError> {
        let full = self.new_object(group, name)?;
        let err = self.h5err(format!("dimension `{full}`"));
        let dataset = self
            .file
            .group(group)
            .and_then(|g| {
                g.new_dataset::<f32>()
                    .shape(len)
                    .attr_creation_order(AttrCreationOrder::Indexed)
                    .create(name)
            })
            .map_err(err)?;
        // netCDF-C's text for a dimension without a variable: the marker, then the length in
        // a field of width 10 ("%s%10d").
        self.set_scale(&dataset, &full, &format!("{NOT_A_VARIABLE}{len:10}"))?;
        self.dims.insert(
            full,
            Dim {
                dataset,
                len,
                unlimited: false,
            },
        );
        Ok(())
    }

    fn add_unlimited_coordinate(
        &mut self,
        group: &str,
        name: &str,
        attrs: &[(&str, Attr)],
    ) -> Result<(), OutputError> {
        let full = self.new_object(group, name)?;
        let err = self.h5err(format!("coordinate `{full}`"));
        let chunk_rows = record_chunk_rows(1);
        let dataset = self
            .file
            .group(group)
            .and_then(|g| {
                g.new_dataset::<f64>()
                    .shape(Extents::from(vec![Extent::resizable(0)]))
                    .chunk(vec![chunk_rows])
                    .set_filters(&self.filters)
                    .attr_creation_order(AttrCreationOrder::Indexed)
                    .create(name)
            })
            .map_err(err)?;
        self.set_scale(&dataset, &full, name)?;
        self.dims.insert(
            full.clone(),
            Dim {
                dataset: dataset.clone(),
                len: 0,
                unlimited: true,
            },
        );
        let batch_chunks = batch_chunks(chunk_rows * std::mem::size_of::<f64>());
        let record = Record {
            row_len: 1,
            chunk_rows,
            batch_chunks,
            buf_start: 0,
            buf: Rows::F64(Vec::with_capacity(batch_chunks * chunk_rows)),
        };
        let var = Var {
            dataset,
            kind: Kind::F64,
            shape: vec![0],
            record: Some(record),
            fixed_chunk_rows: None,
        };
        self.vars.insert(full, var);
        self.set_attrs(group, name, attrs)
    }

    fn add_variable<T: Elem>(
        &mut self,
        group: &str,
        name: &str,
        dims: &[&str],
        attrs: &[(&str, Attr)],
    ) -> Result<(), OutputError> {
        let full = self.new_object(group, name)?;
        let mut shape = Vec::with_capacity(dims.len());
        let mut scales = Vec::with_capacity(dims.len());
        let mut record = false;
        for (axis, dim_name) in dims.iter().enumerate() {
            let Some(dim) = self.find_dim(group, dim_name) else {
                return Err(OutputError::UnknownDimension {
                    path: self.path.clone(),
                    variable: full,
                    dimension: (*dim_name).to_owned(),
                });
            };
            if dim.unlimited {
                if axis != 0 {
                    return Err(OutputError::Layout {
                        path: self.path.clone(),
                        variable: full,
                        reason: format!("the unlimited dimension `{dim_name}` must be the first dimension"),
                    });
                }
                record = true;
                shape.push(0);
            } else {
                shape.push(dim.len);
            }
            scales.push(dim.dataset.clone());
        }
        let row_len: usize = shape.iter().skip(1).product();
        if record && row_len == 0 {
            return Err(OutputError::Layout {
                path: self.path.clone(),
                variable: full,
                reason: "a record variable cannot have a fixed dimension of length 0".to_owned(),
            });
        }
        let chunk_rows = record_chunk_rows(row_len);
        let size: usize = shape.iter().product();
        let fixed_chunk_rows =
            (!record && !shape.is_empty() && size >= COMPRESS_MIN_VALUES && !self.filters.is_empty())
                .then(|| fixed_chunk(&shape)[0]);
        let err = self.h5err(format!("variable `{full}`"));
        let dataset = self
            .file
            .group(group)
            .and_then(|g| {
                let b = g
                    .new_dataset::<T>()
                    .attr_creation_order(AttrCreationOrder::Indexed);
                let b = if shape.is_empty() {
                    b.shape(Extents::scalar())
                } else if record {
                    let mut ext = vec![Extent::resizable(0)];
                    ext.extend(shape[1..].iter().map(|&n| Extent::fixed(n)));
                    let mut chunk = shape.clone();
                    chunk[0] = chunk_rows;
                    b.shape(Extents::from(ext))
                        .chunk(chunk)
                        .set_filters(&self.filters)
                } else {
                    let b = b.shape(shape.clone());
                    match fixed_chunk_rows {
                        Some(rows) => {
                            let mut chunk = shape.clone();
                            chunk[0] = rows;
                            b.chunk(chunk).set_filters(&self.filters)
                        }
                        None => b,
                    }
                };
                b.create(name)
            })
            .map_err(err)?;
        for (axis, (scale, dim_name)) in scales.iter().zip(dims).enumerate() {
            // SAFETY: valid dataset ids; `axis` < rank; the library lock is held.
            let rc = hdf5::sync::sync(|| unsafe {
                ds::H5DSattach_scale(dataset.id(), scale.id(), axis as std::os::raw::c_uint)
            });
            if rc < 0 {
                return Err(OutputError::Scale {
                    path: self.path.clone(),
                    variable: full,
                    dimension: (*dim_name).to_owned(),
                    action: "attach",
                });
            }
        }
        let record = record.then(|| {
            let batch_chunks = batch_chunks(chunk_rows * row_len * std::mem::size_of::<T>());
            let cap = batch_chunks * chunk_rows * row_len;
            Record {
                row_len,
                chunk_rows,
                batch_chunks,
                buf_start: 0,
                buf: match T::KIND {
                    Kind::F64 => Rows::F64(Vec::with_capacity(cap)),
                    Kind::I32 => Rows::I32(Vec::with_capacity(cap)),
                },
            }
        });
        self.vars.insert(
            full,
            Var {
                dataset,
                kind: T::KIND,
                shape,
                record,
                fixed_chunk_rows,
            },
        );
        self.set_attrs(group, name, attrs)
    }

    fn write<T: Elem>(&mut self, group: &str, name: &str, values: &[T]) -> Result<(), OutputError> {
        let path = self.path.clone();
        self.var_mut(group, name)?;
        let full = join(group, name);
        let Inner { vars, packer, .. } = self;
        let Some(var) = vars.get_mut(&full) else {
            return Ok(()); // unreachable: found just above
        };
        let fail = |source| OutputError::Hdf5 {
            path: path.clone(),
            object: format!("variable `{full}`"),
            source,
        };
        var.check_kind::<T>(&path, &full)?;
        if let Some(rec) = &var.record {
            if values.len() % rec.row_len != 0 {
                return Err(OutputError::LengthMismatch {
                    path: path.clone(),
                    variable: full.clone(),
                    expected: rec.row_len * values.len().div_ceil(rec.row_len),
                    actual: values.len(),
                });
            }
            return var.push_rows(packer, values).map_err(fail);
        }
        let expected: usize = var.shape.iter().product();
        if values.len() != expected {
            return Err(OutputError::LengthMismatch {
                path: path.clone(),
                variable: full.clone(),
                expected,
                actual: values.len(),
            });
        }
        if expected == 0 {
            return Ok(());
        }
        match var.fixed_chunk_rows {
            Some(chunk_rows) => {
                let row_len = expected / var.shape[0];
                packer
                    .write_chunks(&var.dataset, 0, chunk_rows, row_len, values)
                    .map_err(fail)
            }
            None => var.dataset.write_raw(values).map_err(fail),
        }
    }

    /// Buffers one record (called once per variable per output time: the full path is built in
    /// a reused string, and names are copied only for an error).
    fn append<T: Elem>(&mut self, group: &str, name: &str, row: &[T]) -> Result<(), OutputError> {
        let Inner {
            vars,
            path,
            packer,
            key,
            ..
        } = self;
        key.clear();
        if group != "/" {
            key.push_str(group);
        }
        key.push('/');
        key.push_str(name);
        let full = key.as_str();
        let Some(var) = vars.get_mut(full) else {
            return Err(OutputError::UnknownVariable {
                path: path.clone(),
                variable: full.to_owned(),
            });
        };
        var.check_kind::<T>(path, full)?;
        let Some(rec) = var.record.as_mut() else {
            return Err(OutputError::Layout {
                path: path.clone(),
                variable: full.to_owned(),
                reason: "is not along an unlimited dimension; write it whole".to_owned(),
            });
        };
        if row.len() != rec.row_len {
            return Err(OutputError::LengthMismatch {
                path: path.clone(),
                variable: full.to_owned(),
                expected: rec.row_len,
                actual: row.len(),
            });
        }
        var.push_rows(packer, row).map_err(|source| OutputError::Hdf5 {
            path: path.clone(),
            object: format!("variable `{full}`"),
            source,
        })
    }

    fn flush_all(&mut self) -> Result<(), OutputError> {
        for (full, var) in &mut self.vars {
            var.flush(&mut self.packer).map_err(|source| OutputError::Hdf5 {
                path: self.path.clone(),
                object: format!("variable `{full}`"),
                source,
            })?;
        }
        self.file
            .flush()
            .map_err(self.h5err("flushing the file".to_owned()))
    }

    /// Opens (or creates, with creation-order tracking) group `name` under `parent`.
    fn open_group(&mut self, parent: &str, name: &str) -> Result<String, OutputError> {
        self.check_name(name)?;
        let full = join(parent, name);
        if self.vars.contains_key(&full) || self.dims.contains_key(&full) {
            return Err(OutputError::InvalidName {
                path: self.path.clone(),
                name: full,
                reason: "the name is already used by a variable or dimension",
            });
        }
        let err = self.h5err(format!("group `{full}`"));
        self.file
            .group(parent)
            .and_then(|p| {
                if p.link_exists(name) {
                    p.group(name)
                } else {
                    p.create_group_builder()
                        .with_gcpl(|g| {
                            g.link_creation_order(LinkCreationOrder::Indexed)
                                .attr_creation_order(AttrCreationOrder::Indexed)
                        })
                        .create(name)
                }
            })
            .map_err(err)?;
        Ok(full)
    }
}

// In-memory files (for the Python package) ------------------------------------------------

/// Writers whose target is an in-memory target ([`memory_target`]) write no file: HDF5's core
/// driver keeps the file in memory with no backing store, and [`NcWriter::finish`] hands the
/// finished file image to [`take_memory_image`] instead of renaming a temporary file.
mod memory {
    use super::{rewrite_superblock_checksum, File, OutputError};
    use std::path::{Path, PathBuf};
    use std::sync::Mutex;

    /// Registered in-memory targets with the file image each finished writer left (`None`
    /// while none finished).
    static TARGETS: Mutex<Vec<(PathBuf, Option<Vec<u8>>)>> = Mutex::new(Vec::new());

    /// Growth step of the core driver's buffer, bytes.
    pub(super) const INCREMENT: usize = 1 << 20;

    fn targets() -> std::sync::MutexGuard<'static, Vec<(PathBuf, Option<Vec<u8>>)>> {
        TARGETS.lock().unwrap_or_else(|e| e.into_inner())
    }

    pub(super) fn register(path: PathBuf) {
        targets().push((path, None));
    }

    pub(super) fn is_target(path: &Path) -> bool {
        targets().iter().any(|(p, _)| p == path)
    }

    pub(super) fn take(path: &Path) -> Option<Vec<u8>> {
        let mut list = targets();
        let i = list.iter().position(|(p, _)| p == path)?;
        list.swap_remove(i).1
    }

    /// Copies the file image of `file` (flushed by HDF5 first), closes the file and keeps the
    /// image for [`take`].
    pub(super) fn keep_image(file: File, path: PathBuf) -> Result<(), OutputError> {
        let fail = |object: &str| OutputError::Hdf5 {
            path: path.clone(),
            object: object.to_owned(),
            source: hdf5::Error::query().unwrap_or_else(|e| e),
        };
        let image = hdf5::sync::sync(|| {
            // SAFETY: a valid file id; the first image call asks for the size, the second
            // copies exactly that many bytes into a buffer of that length. The flush first
            // writes the metadata cache into the image (without it the image has stale,
            // checksum-failing metadata).
            unsafe {
                if hdf5_sys::h5f::H5Fflush(file.id(), hdf5_sys::h5f::H5F_scope_t::H5F_SCOPE_GLOBAL) < 0 {
                    return None;
                }
                let size = hdf5_sys::h5f::H5Fget_file_image(file.id(), std::ptr::null_mut(), 0);
                if size < 0 {
                    return None;
                }
                let mut buf = vec![0u8; size as usize];
                let got = hdf5_sys::h5f::H5Fget_file_image(file.id(), buf.as_mut_ptr().cast(), buf.len());
                (got == size).then_some(buf)
            }
        })
        .ok_or_else(|| fail("copying the in-memory file image"))?;
        let mut image = image;
        rewrite_superblock_checksum(&mut image);
        file.close().map_err(|source| OutputError::Hdf5 {
            path: path.clone(),
            object: "closing the file".to_owned(),
            source,
        })?;
        if let Some(slot) = targets().iter_mut().find(|(p, _)| *p == path) {
            slot.1 = Some(image);
        }
        Ok(())
    }
}

/// Writes the checksum of a version 2 or 3 superblock at the start of `image` afresh.
///
/// HDF5 1.10 (1.10.8 checked) leaves a checksum in the superblock of an image from
/// `H5Fget_file_image` that does not match the superblock, so readers refuse the image
/// ("incorrect metadata checksum"). Layout (HDF5 File Format Specification, "Superblock", from
/// memory): signature (8 bytes), version, size of offsets, size of lengths, flags, four
/// addresses, then the Jenkins lookup3 checksum of all bytes before it.
pub(crate) fn rewrite_superblock_checksum(image: &mut [u8]) {
    if image.len() < 12 || &image[..8] != b"\x89HDF\r\n\x1a\n" || !(2..=3).contains(&image[8]) {
        return;
    }
    let n = 12 + 4 * usize::from(image[9]);
    if image.len() >= n + 4 {
        let sum = lookup3(&image[..n], 0);
        image[n..n + 4].copy_from_slice(&sum.to_le_bytes());
    }
}

/// Bob Jenkins' lookup3 `hashlittle` (public domain, 2006), the checksum of HDF5 metadata.
pub(crate) fn lookup3(data: &[u8], init: u32) -> u32 {
    fn mix(a: &mut u32, b: &mut u32, c: &mut u32) {
        *a = a.wrapping_sub(*c) ^ c.rotate_left(4);
        *c = c.wrapping_add(*b);
        *b = b.wrapping_sub(*a) ^ a.rotate_left(6);
        *a = a.wrapping_add(*c);
        *c = c.wrapping_sub(*b) ^ b.rotate_left(8);
        *b = b.wrapping_add(*a);
        *a = a.wrapping_sub(*c) ^ c.rotate_left(16);
        *c = c.wrapping_add(*b);
        *b = b.wrapping_sub(*a) ^ a.rotate_left(19);
        *a = a.wrapping_add(*c);
        *c = c.wrapping_sub(*b) ^ b.rotate_left(4);
        *b = b.wrapping_add(*a);
    }
    fn last(a: &mut u32, b: &mut u32, c: &mut u32) {
        *c = (*c ^ *b).wrapping_sub(b.rotate_left(14));
        *a = (*a ^ *c).wrapping_sub(c.rotate_left(11));
        *b = (*b ^ *a).wrapping_sub(a.rotate_left(25));
        *c = (*c ^ *b).wrapping_sub(b.rotate_left(16));
        *a = (*a ^ *c).wrapping_sub(c.rotate_left(4));
        *b = (*b ^ *a).wrapping_sub(a.rotate_left(14));
        *c = (*c ^ *b).wrapping_sub(b.rotate_left(24));
    }
    let word = |w: &[u8]| {
        let mut b = [0u8; 4];
        b[..w.len()].copy_from_slice(w);
        u32::from_le_bytes(b)
    };
    let start = 0xdead_beef_u32.wrapping_add(data.len() as u32).wrapping_add(init);
    let (mut a, mut b, mut c) = (start, start, start);
    let mut rest = data;
    while rest.len() > 12 {
        a = a.wrapping_add(word(&rest[0..4]));
        b = b.wrapping_add(word(&rest[4..8]));
        c = c.wrapping_add(word(&rest[8..12]));
        mix(&mut a, &mut b, &mut c);
        rest = &rest[12..];
    }
    if rest.is_empty() {
        return c;
    }
    let mut tail = [0u8; 12];
    tail[..rest.len()].copy_from_slice(rest);
    a = a.wrapping_add(word(&tail[0..4]));
    b = b.wrapping_add(word(&tail[4..8]));
    c = c.wrapping_add(word(&tail[8..12]));
    last(&mut a, &mut b, &mut c);
    c
}

/// A new in-memory target: a writer created for this path (by any job given it as its output
/// path) writes no file, and the bytes of the file it finished are taken with
/// [`take_memory_image`]. `name` is the file name shown in messages.
pub fn memory_target(name: &str) -> PathBuf {
    let path = PathBuf::from(format!(
        "/icefold-memory-{}-{}/{name}",
        std::process::id(),
        TEMP_SEQ.fetch_add(1, Ordering::Relaxed)
    ));
    memory::register(path.clone());
    path
}

/// The finished file at an in-memory target (the netCDF-4/HDF5 bytes), and the target
/// forgotten; `None` if no writer finished a file there.
pub fn take_memory_image(target: &Path) -> Option<Vec<u8>> {
    memory::take(target)
}

impl NcWriter {
    /// [`NcWriter::create_with_deflate`] for an in-memory target: the same layout in a file
    /// held by HDF5's core driver without backing store.
    fn create_in_memory(target: &Path, level: u8) -> Result<NcWriter, OutputError> {
        let file = File::with_options()
            .with_fapl(|p| p.libver_v18().core_options(memory::INCREMENT, false))
            .with_fcpl(|p| {
                p.link_creation_order(LinkCreationOrder::Indexed)
                    .attr_creation_order(AttrCreationOrder::Indexed)
            })
            .create(target)
            .map_err(|source| OutputError::Create {
                path: target.to_path_buf(),
                temp: target.to_path_buf(),
                source,
            })?;
        Ok(NcWriter {
            inner: Inner::new(file, target, level),
            // Nothing on disk to delete.
            temp: TempFile {
                path: target.to_path_buf(),
                armed: false,
                replace: true,
            },
        })
    }
}

#[cfg(test)]
mod tests {
    //! Round trips through [`NcReader`]; the outside checks (xarray, h5py, netCDF4) are in
    //! `tests/python/test_netcdf_writer_smoke.py`.

    use super::*;
    use crate::output::NcReader;

    static DIR_SEQ: AtomicU64 = AtomicU64::new(0);

    /// A fresh directory under the system temp dir, removed when dropped.
    struct TestDir(PathBuf);

    impl TestDir {
        fn new(tag: &str) -> TestDir {
            let seq = DIR_SEQ.fetch_add(1, Ordering::Relaxed);
            let dir = std::env::temp_dir().join(format!("icefold-output-{tag}-{}-{seq}", std::process::id()));
            let _ = std::fs::remove_dir_all(&dir);
            std::fs::create_dir_all(&dir).unwrap();
            TestDir(dir)
        }

        fn file(&self, name: &str) -> PathBuf {
            self.0.join(name)
        }

        /// Names of all entries in the directory.
        fn entries(&self) -> Vec<String> {
            let mut v: Vec<String> = std::fs::read_dir(&self.0)
                .unwrap()
                .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
                .collect();
            v.sort();
            v
        }
    }

    impl Drop for TestDir {
        fn drop(&mut self) {
            let _ = std::fs::remove_dir_all(&self.0);
        }
    }

    fn units(u: &str) -> (&'static str, Attr) {
        ("units", Attr::from(u))
    }

    /// A small run-like file: fixed `lat` with bounds, unlimited `time`, a record variable and
    /// an `i32` variable.
    fn write_sample(path: &Path, records: usize) -> Result<(), OutputError> {
        let mut w = NcWriter::create(path)?;
        w.set_attr_str("title", "sample °C")?;
        w.set_attr_f64("solar_constant", 1361.5)?;
        w.set_attr_i64("seed", -42)?;
        let lat = [-60.0, 0.0, 60.0];
        w.add_coordinate("lat", &lat, &[units("degrees_north"), ("axis", Attr::from("Y"))])?;
        w.add_dimension("bnds", 2)?;
        w.add_variable_f64("lat_bnds", &["lat", "bnds"], &[])?;
        w.write_f64("lat_bnds", &[-90.0, -30.0, -30.0, 30.0, 30.0, 90.0])?;
        w.set_var_attr_str("lat", "bounds", "lat_bnds")?;
        w.add_unlimited_coordinate("time", &[units("year")])?;
        w.add_variable_f64("surface_temperature", &["time", "lat"], &[units("K")])?;
        w.add_variable_i32("flag", &["lat"], &[("flag_values", Attr::from("0 1"))])?;
        w.write_i32("flag", &[1, 0, 1])?;
        for i in 0..records {
            w.append_coordinate("time", i as f64 * 0.5)?;
            let t = 250.0 + i as f64;
            w.append_row_f64("surface_temperature", &[t, t + 20.0, t + 1.0])?;
        }
        w.set_var_attr_f64("surface_temperature", "valid_min", 100.0)?;
        w.set_var_attr_i64("flag", "count", 3)?;
        w.finish()
    }

    #[test]
    fn round_trip_of_coordinates_variables_and_attributes() {
        let dir = TestDir::new("roundtrip");
        let path = dir.file("run.nc");
        write_sample(&path, 5).unwrap();
        let r = NcReader::open(&path).unwrap();

        assert_eq!(r.attr_str("title").unwrap().as_deref(), Some("sample °C"));
        assert_eq!(r.attr_f64("solar_constant").unwrap(), Some(1361.5));
        assert_eq!(r.attr_i64("seed").unwrap(), Some(-42));
        assert_eq!(r.attr_f64("seed").unwrap(), Some(-42.0));
        assert_eq!(r.attr_str("missing").unwrap(), None);
        assert!(matches!(r.attr_i64("title"), Err(OutputError::AttrType { .. })));
        assert_eq!(r.attr_names().unwrap(), ["title", "solar_constant", "seed"]);

        // Creation order, placeholder `bnds` left out.
        assert_eq!(
            r.var_names().unwrap(),
            ["lat", "lat_bnds", "time", "surface_temperature", "flag"]
        );
        assert_eq!(r.dim_names().unwrap(), ["lat", "bnds", "time"]);
        assert_eq!(r.var_dims("lat").unwrap(), ["lat"]);
        assert_eq!(r.var_dims("lat_bnds").unwrap(), ["lat", "bnds"]);
        assert_eq!(r.var_dims("surface_temperature").unwrap(), ["time", "lat"]);
        assert_eq!(r.var_shape("surface_temperature").unwrap(), [5, 3]);
        assert_eq!(r.dim_len("bnds").unwrap(), 2);
        assert_eq!(r.dim_len("time").unwrap(), 5);
        assert!(r.dim_unlimited("time").unwrap());
        assert!(!r.dim_unlimited("lat").unwrap());

        assert_eq!(r.read_f64("lat").unwrap(), [-60.0, 0.0, 60.0]);
        assert_eq!(
            r.read_f64("lat_bnds").unwrap(),
            [-90.0, -30.0, -30.0, 30.0, 30.0, 90.0]
        );
        assert_eq!(r.read_f64("time").unwrap(), [0.0, 0.5, 1.0, 1.5, 2.0]);
        let st = r.read_f64("surface_temperature").unwrap();
        assert_eq!(&st[..6], &[250.0, 270.0, 251.0, 251.0, 271.0, 252.0]);
        assert_eq!(st[14], 255.0);
        assert_eq!(r.read_f64("flag").unwrap(), [1.0, 0.0, 1.0]);

        assert_eq!(
            r.var_attr_str("lat", "units").unwrap().as_deref(),
            Some("degrees_north")
        );
        assert_eq!(r.var_attr_names("lat").unwrap(), ["units", "axis", "bounds"]);
        assert_eq!(
            r.var_attr_f64("surface_temperature", "valid_min").unwrap(),
            Some(100.0)
        );
        assert_eq!(r.var_attr_i64("flag", "count").unwrap(), Some(3));
        // The placeholder's NAME is netCDF-C's marker plus the length in 10 columns.
        let name = r.var_attr_str("bnds", "NAME").unwrap().unwrap();
        assert_eq!(name, format!("{NOT_A_VARIABLE}         2"));
        assert!(matches!(
            r.read_f64("nope"),
            Err(OutputError::UnknownVariable { .. })
        ));
    }

    #[test]
    fn appending_ten_thousand_records_reads_back_exactly() {
        let dir = TestDir::new("append");
        let path = dir.file("long.nc");
        let cols = 90;
        let lat: Vec<f64> = (0..cols).map(|j| -89.0 + 2.0 * j as f64).collect();
        let mut w = NcWriter::create(&path).unwrap();
        w.add_coordinate("lat", &lat, &[]).unwrap();
        w.add_unlimited_coordinate("time", &[]).unwrap();
        w.add_variable_f64("field", &["time", "lat"], &[]).unwrap();
        w.add_variable_i32("count", &["time"], &[]).unwrap();
        let mut row = vec![0.0; cols];
        for i in 0..10_000 {
            w.append_coordinate("time", i as f64).unwrap();
            for (j, v) in row.iter_mut().enumerate() {
                *v = (i * 1000 + j) as f64;
            }
            w.append_row_f64("field", &row).unwrap();
            w.append_row_i32("count", &[i as i32]).unwrap();
            // Memory stays flat: never more than one batch of chunks is buffered.
            let rec = w.inner.vars["/field"].record.as_ref().unwrap();
            assert!(rec.buf.len() < rec.batch_rows() * cols);
            assert!(rec.batch_rows() * cols * 8 <= BATCH_BYTES);
        }
        w.finish().unwrap();

        let r = NcReader::open(&path).unwrap();
        assert_eq!(r.var_shape("field").unwrap(), [10_000, cols]);
        let field = r.read_f64("field").unwrap();
        // Integers below 2^53 are exact in f64, so equality is the right check.
        for (k, v) in field.iter().enumerate() {
            assert_eq!(*v, ((k / cols) * 1000 + k % cols) as f64, "value {k}");
        }
        let count = r.read_f64("count").unwrap();
        assert!(count.iter().enumerate().all(|(i, &c)| c == i as f64));
        assert_eq!(r.dim_len("time").unwrap(), 10_000);

        // Chunked as whole rows with shuffle + deflate.
        let f = File::open(&path).unwrap();
        let ds = f.dataset("field").unwrap();
        assert_eq!(ds.chunk(), Some(vec![RECORD_CHUNK_ROWS, cols]));
        let filters = ds.filters();
        assert!(filters.contains(&hdf5::filters::Filter::Shuffle), "{filters:?}");
        assert!(
            filters.contains(&hdf5::filters::Filter::Deflate(DEFAULT_DEFLATE_LEVEL)),
            "{filters:?}"
        );
    }

    /// One file with a record variable, an unlimited coordinate and a large fixed-size
    /// variable at deflate `level`; returns the values written to `field`.
    fn write_levelled(path: &Path, level: u8) -> Vec<f64> {
        let cols = 90;
        let mut w = NcWriter::create_with_deflate(path, level).unwrap();
        w.add_coordinate("lat", &(0..cols).map(|j| j as f64).collect::<Vec<_>>(), &[])
            .unwrap();
        w.add_unlimited_coordinate("time", &[]).unwrap();
        w.add_variable_f64("field", &["time", "lat"], &[]).unwrap();
        w.add_dimension("member", 100).unwrap();
        w.add_variable_f64("table", &["member", "lat"], &[]).unwrap();
        let table: Vec<f64> = (0..100 * cols).map(|k| (k % 7) as f64 * 0.25).collect();
        w.write_f64("table", &table).unwrap();
        let mut all = Vec::new();
        for i in 0..200 {
            w.append_coordinate("time", i as f64).unwrap();
            let row: Vec<f64> = (0..cols).map(|j| 250.0 + (i + j) as f64 * 0.125).collect();
            w.append_row_f64("field", &row).unwrap();
            all.extend_from_slice(&row);
        }
        w.finish().unwrap();
        all
    }

    #[test]
    fn deflate_level_sets_the_filters_of_record_and_large_variables() {
        use hdf5::plist::dataset_create::Layout;
        let dir = TestDir::new("levels");
        for level in [0, 1, 6, 9] {
            let path = dir.file(&format!("level{level}.nc"));
            let written = write_levelled(&path, level);
            let r = NcReader::open(&path).unwrap();
            // Values are stored, not computed: equality is the right check.
            assert_eq!(r.read_f64("field").unwrap(), written, "level {level}");
            assert_eq!(r.var_shape("field").unwrap(), [200, 90]);
            drop(r);
            let f = File::open(&path).unwrap();
            let (field, time, table) = (
                f.dataset("field").unwrap(),
                f.dataset("time").unwrap(),
                f.dataset("table").unwrap(),
            );
            // Record variables stay chunked (resizable along the unlimited dimension) at
            // every level.
            assert_eq!(field.chunk(), Some(vec![RECORD_CHUNK_ROWS, 90]), "level {level}");
            assert!(time.is_chunked(), "level {level}");
            if level == 0 {
                assert!(field.filters().is_empty(), "{:?}", field.filters());
                assert!(time.filters().is_empty(), "{:?}", time.filters());
                assert_eq!(table.layout(), Layout::Contiguous);
                assert!(table.filters().is_empty());
            } else {
                let want = vec![Filter::Shuffle, Filter::Deflate(level)];
                assert_eq!(field.filters(), want, "level {level}");
                assert_eq!(time.filters(), want, "level {level}");
                assert_eq!(table.layout(), Layout::Chunked);
                assert_eq!(table.filters(), want, "level {level}");
            }
        }
        // The values repeat with a short period, so deflate must shrink the file, and a
        // higher level must not make it larger than level 1 by more than zlib's block slack.
        let size = |l: u8| {
            std::fs::metadata(dir.file(&format!("level{l}.nc")))
                .unwrap()
                .len()
        };
        assert!(size(1) < size(0), "{} vs {}", size(1), size(0));
        assert!(size(9) <= size(1) + 512, "{} vs {}", size(9), size(1));
    }

    /// HDF5's shuffle filter as its documentation states it, one byte at a time.
    fn shuffle_by_definition(src: &[u8], elem: usize, out_len: usize) -> Vec<u8> {
        let count = out_len / elem;
        let mut out = vec![0u8; out_len];
        for i in 0..src.len() / elem {
            for j in 0..elem {
                out[j * count + i] = src[i * elem + j];
            }
        }
        out
    }

    #[test]
    fn shuffle_matches_the_filter_definition_for_full_and_partial_chunks() {
        let src: Vec<u8> = (0..8 * 203u32)
            .map(|k| (k.wrapping_mul(2_654_435_761) >> 24) as u8)
            .collect();
        for elem in [8, 4] {
            // Full chunks with and without a tail after the 8-element blocks, and a partial
            // chunk padded with zeros.
            for (have, chunk) in [(8 * 203, 8 * 203), (8 * 64, 8 * 64), (8 * 150, 8 * 203)] {
                let mut out = vec![0xAAu8; chunk];
                shuffle(&src[..have], elem, &mut out);
                assert_eq!(
                    out,
                    shuffle_by_definition(&src[..have], elem, chunk),
                    "elem {elem}, {have} of {chunk} bytes"
                );
            }
        }
    }

    #[test]
    fn flush_inside_a_chunk_then_more_records_read_back_whole() {
        // A checkpoint flush writes a partial chunk; the records after it complete the same
        // chunk, which is then rewritten whole. Every level, to cover raw and deflated chunks.
        let dir = TestDir::new("midflush");
        for level in [0, 1, 9] {
            let path = dir.file(&format!("m{level}.nc"));
            let mut w = NcWriter::create_with_deflate(&path, level).unwrap();
            w.add_coordinate("x", &[0.0, 1.0, 2.0], &[]).unwrap();
            w.add_unlimited_coordinate("time", &[]).unwrap();
            w.add_variable_f64("v", &["time", "x"], &[]).unwrap();
            w.add_variable_i32("n", &["time"], &[]).unwrap();
            let mut want = Vec::new();
            for i in 0..3000 {
                let row = [i as f64, -(i as f64) * 0.5, 1e300 / (i as f64 + 1.0)];
                w.append_coordinate("time", i as f64).unwrap();
                w.append_row_f64("v", &row).unwrap();
                w.append_row_i32("n", &[i]).unwrap();
                want.extend_from_slice(&row);
                if [5, 6, 70, 1500, 2047].contains(&i) {
                    w.flush().unwrap();
                }
            }
            w.finish().unwrap();
            let r = NcReader::open(&path).unwrap();
            // Stored values, not computed ones: equality is the right check.
            assert_eq!(r.read_f64("v").unwrap(), want, "level {level}");
            assert_eq!(
                r.read_f64("n").unwrap(),
                (0..3000).map(f64::from).collect::<Vec<_>>()
            );
            assert_eq!(r.dim_len("time").unwrap(), 3000);
        }
    }

    #[test]
    fn large_fixed_variable_spans_several_chunks_with_a_partial_last_one() {
        let dir = TestDir::new("bigfixed");
        let path = dir.file("big.nc");
        let (rows, cols) = (3000, 90);
        let mut w = NcWriter::create(&path).unwrap();
        w.add_dimension("member", rows).unwrap();
        w.add_coordinate("lat", &(0..cols).map(|j| j as f64).collect::<Vec<_>>(), &[])
            .unwrap();
        w.add_variable_f64("table", &["member", "lat"], &[]).unwrap();
        w.add_variable_i32("flags", &["member", "lat"], &[]).unwrap();
        let table: Vec<f64> = (0..rows * cols).map(|k| (k as f64).sqrt()).collect();
        let flags: Vec<i32> = (0..rows * cols).map(|k| (k % 13) as i32 - 6).collect();
        w.write_f64("table", &table).unwrap();
        w.write_i32("flags", &flags).unwrap();
        let long: Vec<f64> = (0..200_000).map(|k| f64::from(k) * 0.25).collect();
        w.add_coordinate("step", &long, &[]).unwrap();
        w.finish().unwrap();
        let f = File::open(&path).unwrap();
        let chunk = f.dataset("table").unwrap().chunk().unwrap();
        assert!(chunk[0] < rows && rows % chunk[0] != 0, "{chunk:?}");
        assert!(f.dataset("step").unwrap().chunk().unwrap()[0] < long.len());
        drop(f);
        let r = NcReader::open(&path).unwrap();
        assert_eq!(r.read_f64("table").unwrap(), table);
        let back: Vec<f64> = flags.iter().map(|&v| f64::from(v)).collect();
        assert_eq!(r.read_f64("flags").unwrap(), back);
        assert_eq!(r.read_f64("step").unwrap(), long);
    }

    #[test]
    fn deflate_level_above_nine_is_refused_before_a_file_exists() {
        let dir = TestDir::new("badlevel");
        let path = dir.file("x.nc");
        let e = NcWriter::create_with_deflate(&path, 10).err().unwrap();
        assert!(matches!(e, OutputError::DeflateLevel { level: 10, .. }), "{e}");
        assert!(e.to_string().contains("0 to 9"), "{e}");
        assert!(dir.entries().is_empty(), "{:?}", dir.entries());
    }

    #[test]
    fn partial_file_stays_beside_target_until_finish() {
        let dir = TestDir::new("partial");
        let target = dir.file("out.nc");
        let mut w = NcWriter::create(&target).unwrap();
        w.add_coordinate("lat", &[1.0, 2.0], &[]).unwrap();
        let temp = w.temp_path().to_path_buf();
        assert_eq!(temp.parent(), target.parent());
        let temp_name = temp.file_name().unwrap().to_string_lossy().into_owned();
        assert!(temp_name.starts_with(".out.nc.partial-"), "{temp_name}");
        assert!(temp.exists());
        assert!(!target.exists());
        w.finish().unwrap();
        assert!(target.exists());
        assert_eq!(dir.entries(), ["out.nc"]);
    }

    #[test]
    fn finish_never_replaces_a_forbidden_target_that_appeared_while_writing() {
        let dir = TestDir::new("noreplace");
        let target = dir.file("out.nc");
        forbid_replacing(&target);
        let mut w = NcWriter::create(&target).unwrap();
        w.add_coordinate("lat", &[1.0, 2.0], &[]).unwrap();
        // Another writer finishes first.
        std::fs::write(&target, b"the other result").unwrap();
        let e = w.finish().unwrap_err();
        let OutputError::Exists {
            path,
            kept: Some(kept),
        } = &e
        else {
            panic!("{e}")
        };
        assert_eq!(path, &target);
        assert_eq!(std::fs::read(&target).unwrap(), b"the other result");
        let kept_name = format!("out.kept-{}.nc", std::process::id());
        assert_eq!(kept.file_name().unwrap().to_string_lossy(), kept_name);
        assert!(e.to_string().contains(&kept.display().to_string()), "{e}");
        // The kept file is the complete result.
        assert_eq!(NcReader::open(kept).unwrap().read_f64("lat").unwrap(), [1.0, 2.0]);
        assert_eq!(dir.entries(), [kept_name, "out.nc".into()]);
    }

    #[test]
    fn finish_replaces_a_target_unless_forbidden() {
        let dir = TestDir::new("replaces");
        let target = dir.file("out.nc");
        std::fs::write(&target, b"old").unwrap();
        let mut w = NcWriter::create(&target).unwrap();
        w.add_coordinate("lat", &[3.0], &[]).unwrap();
        w.finish().unwrap();
        assert_eq!(NcReader::open(&target).unwrap().read_f64("lat").unwrap(), [3.0]);
        assert_eq!(dir.entries(), ["out.nc"]);
    }

    #[test]
    fn renames_without_replacing_refuse_an_existing_name() {
        let dir = TestDir::new("norename");
        for (name, rename) in [
            (
                "renameat2",
                rename_no_replace as fn(&Path, &Path) -> std::io::Result<()>,
            ),
            ("hard link", rename_by_link),
        ] {
            let (a, b) = (dir.file("a"), dir.file("b"));
            std::fs::write(&a, b"a").unwrap();
            std::fs::write(&b, b"b").unwrap();
            let e = rename(&a, &b).unwrap_err();
            assert_eq!(e.kind(), std::io::ErrorKind::AlreadyExists, "{name}");
            assert_eq!(std::fs::read(&b).unwrap(), b"b", "{name}");
            std::fs::remove_file(&b).unwrap();
            rename(&a, &b).unwrap();
            assert_eq!(dir.entries(), ["b"], "{name}");
            assert_eq!(std::fs::read(&b).unwrap(), b"a", "{name}");
            std::fs::remove_file(&b).unwrap();
        }
    }

    #[test]
    fn abandon_and_drop_delete_the_partial_file() {
        let dir = TestDir::new("abandon");
        let w = NcWriter::create(&dir.file("a.nc")).unwrap();
        assert_eq!(dir.entries().len(), 1);
        w.abandon();
        assert!(dir.entries().is_empty());

        {
            let mut w = NcWriter::create(&dir.file("b.nc")).unwrap();
            w.add_unlimited_coordinate("time", &[]).unwrap();
            w.append_coordinate("time", 1.0).unwrap();
            assert_eq!(dir.entries().len(), 1);
        }
        assert!(dir.entries().is_empty());
    }

    #[test]
    fn missing_directory_error_names_the_path() {
        let dir = TestDir::new("missing");
        let target = dir.file("no-such-dir").join("out.nc");
        let err = NcWriter::create(&target).err().expect("must fail");
        assert!(matches!(err, OutputError::NoDirectory { .. }), "{err:?}");
        let msg = err.to_string();
        assert!(msg.contains(&target.display().to_string()), "{msg}");
        assert!(msg.contains("does not exist"), "{msg}");
    }

    #[test]
    fn a_child_started_while_a_file_is_open_does_not_hold_its_lock() {
        // Without close-on-exec the child inherits the descriptor and HDF5's lock, and the
        // reader below is refused with "unable to lock file" until the child exits.
        let dir = TestDir::new("cloexec");
        let target = dir.file("out.nc");
        let mut w = NcWriter::create(&target).unwrap();
        w.set_attr_str("icefold_kind", "test").unwrap();
        let mut child = std::process::Command::new("sleep").arg("5").spawn().unwrap();
        w.finish().unwrap();
        let opened = crate::output::NcReader::open(&target);
        child.kill().unwrap();
        child.wait().unwrap();
        assert!(opened.is_ok(), "{:?}", opened.err());
    }

    #[test]
    fn attribute_of_200_kb_round_trips() {
        let dir = TestDir::new("bigattr");
        let path = dir.file("big.nc");
        // Above the 64 KiB object-header limit of the default (pre-1.8) file format.
        let text: String = (0..200 * 1024)
            .map(|i| char::from(b'a' + (i % 26) as u8))
            .collect();
        let mut w = NcWriter::create(&path).unwrap();
        w.set_attr_str("config", &text).unwrap();
        w.add_coordinate("x", &[0.0], &[]).unwrap();
        w.set_var_attr_str("x", "note", &text).unwrap();
        w.finish().unwrap();
        let r = NcReader::open(&path).unwrap();
        assert_eq!(r.attr_str("config").unwrap().unwrap(), text);
        assert_eq!(r.var_attr_str("x", "note").unwrap().unwrap(), text);
    }

    #[test]
    fn setting_an_attribute_again_replaces_it() {
        let dir = TestDir::new("reattr");
        let path = dir.file("a.nc");
        let mut w = NcWriter::create(&path).unwrap();
        w.add_coordinate("x", &[0.0], &[]).unwrap();
        w.set_attr_str("note", "first").unwrap();
        w.set_attr_f64("other", 1.0).unwrap();
        w.set_attr_i64("note", 2).unwrap();
        w.set_var_attr_str("x", "units", "m").unwrap();
        w.set_var_attr_str("x", "units", "km").unwrap();
        w.finish().unwrap();
        let r = NcReader::open(&path).unwrap();
        assert_eq!(r.attr_i64("note").unwrap(), Some(2));
        assert_eq!(r.attr_names().unwrap().iter().filter(|n| *n == "note").count(), 1);
        assert_eq!(r.var_attr_str("x", "units").unwrap().as_deref(), Some("km"));
    }

    #[test]
    fn zero_length_dimension() {
        let dir = TestDir::new("zero");
        let path = dir.file("zero.nc");
        let mut w = NcWriter::create(&path).unwrap();
        w.add_dimension("tipping", 0).unwrap();
        w.add_variable_f64("tipping_control", &["tipping"], &[units("1")])
            .unwrap();
        w.add_variable_i32("tipping_direction", &["tipping"], &[])
            .unwrap();
        w.write_f64("tipping_control", &[]).unwrap();
        w.finish().unwrap();
        let r = NcReader::open(&path).unwrap();
        assert_eq!(r.dim_len("tipping").unwrap(), 0);
        assert_eq!(r.var_shape("tipping_control").unwrap(), [0]);
        assert_eq!(r.var_dims("tipping_direction").unwrap(), ["tipping"]);
        assert!(r.read_f64("tipping_control").unwrap().is_empty());
    }

    #[test]
    fn flushed_partial_file_is_readable_as_left_by_a_killed_writer() {
        let dir = TestDir::new("flush");
        let mut w = NcWriter::create(&dir.file("f.nc")).unwrap();
        w.add_coordinate("lat", &[0.0, 1.0], &[]).unwrap();
        w.add_unlimited_coordinate("time", &[]).unwrap();
        w.add_variable_f64("t", &["time", "lat"], &[]).unwrap();
        for i in 0..7 {
            w.append_coordinate("time", f64::from(i)).unwrap();
            w.append_row_f64("t", &[f64::from(i), -f64::from(i)]).unwrap();
        }
        w.flush().unwrap();
        // A copy taken now is what a SIGKILL would leave behind.
        let snapshot = dir.file("snapshot.nc");
        std::fs::copy(w.temp_path(), &snapshot).unwrap();
        w.append_coordinate("time", 7.0).unwrap();
        let r = NcReader::open(&snapshot).unwrap();
        assert_eq!(r.var_shape("t").unwrap(), [7, 2]);
        assert_eq!(r.read_f64("time").unwrap(), [0.0, 1.0, 2.0, 3.0, 4.0, 5.0, 6.0]);
        assert_eq!(r.read_f64("t").unwrap()[12..], [6.0, -6.0]);
        drop(r);
        w.abandon();
    }

    #[test]
    fn write_in_blocks_on_a_record_variable_appends() {
        let dir = TestDir::new("block");
        let path = dir.file("b.nc");
        let mut w = NcWriter::create(&path).unwrap();
        w.add_coordinate("x", &[0.0, 1.0], &[]).unwrap();
        w.add_unlimited_coordinate("time", &[]).unwrap();
        w.add_variable_f64("v", &["time", "x"], &[]).unwrap();
        w.append_row_f64("v", &[1.0, 2.0]).unwrap();
        w.write_f64("v", &[3.0, 4.0, 5.0, 6.0]).unwrap();
        w.append_row_f64("v", &[7.0, 8.0]).unwrap();
        w.write_f64("time", &[0.0, 1.0, 2.0, 3.0]).unwrap();
        w.finish().unwrap();
        let r = NcReader::open(&path).unwrap();
        assert_eq!(r.read_f64("v").unwrap(), [1.0, 2.0, 3.0, 4.0, 5.0, 6.0, 7.0, 8.0]);
        assert_eq!(r.dim_len("time").unwrap(), 4);
    }

    #[test]
    fn bad_calls_give_errors_naming_the_variable() {
        let dir = TestDir::new("bad");
        let mut w = NcWriter::create(&dir.file("bad.nc")).unwrap();
        w.add_coordinate("lat", &[1.0, 2.0, 3.0], &[]).unwrap();
        w.add_unlimited_coordinate("time", &[]).unwrap();
        w.add_variable_f64("t", &["time", "lat"], &[]).unwrap();

        let e = w.append_row_f64("t", &[1.0]).unwrap_err();
        assert!(
            matches!(
                e,
                OutputError::LengthMismatch {
                    expected: 3,
                    actual: 1,
                    ..
                }
            ),
            "{e}"
        );
        assert!(e.to_string().contains("`/t`"), "{e}");
        let e = w.write_f64("lat", &[1.0]).unwrap_err();
        assert!(
            matches!(
                e,
                OutputError::LengthMismatch {
                    expected: 3,
                    actual: 1,
                    ..
                }
            ),
            "{e}"
        );
        let e = w.append_row_i32("t", &[1, 2, 3]).unwrap_err();
        assert!(e.to_string().contains("holds f64 values, not i32"), "{e}");
        let e = w.append_row_f64("lat", &[1.0]).unwrap_err();
        assert!(e.to_string().contains("not along an unlimited dimension"), "{e}");
        let e = w.add_variable_f64("u", &["lat", "depth"], &[]).unwrap_err();
        assert!(e.to_string().contains("unknown dimension `depth`"), "{e}");
        let e = w.add_variable_f64("u", &["lat", "time"], &[]).unwrap_err();
        assert!(e.to_string().contains("must be the first dimension"), "{e}");
        let e = w.add_variable_f64("lat", &["lat"], &[]).unwrap_err();
        assert!(e.to_string().contains("already used"), "{e}");
        let e = w.add_variable_f64("a/b", &["lat"], &[]).unwrap_err();
        assert!(matches!(e, OutputError::InvalidName { .. }), "{e}");
        let e = w.set_var_attr_str("nope", "units", "K").unwrap_err();
        assert!(matches!(e, OutputError::UnknownVariable { .. }), "{e}");
        let e = w.set_attr_str("bad", "a\0b").unwrap_err();
        assert!(matches!(e, OutputError::NulInString { .. }), "{e}");
        w.abandon();
    }

    #[test]
    fn groups_use_parent_dimensions() {
        let dir = TestDir::new("groups");
        let path = dir.file("g.nc");
        let mut w = NcWriter::create(&path).unwrap();
        w.add_coordinate("lat", &[0.0, 10.0], &[]).unwrap();
        {
            let mut run = w.group("run").unwrap();
            assert_eq!(run.path(), "/run");
            run.set_attr_str("member", "0").unwrap();
            run.add_unlimited_coordinate("time", &[]).unwrap();
            run.add_variable_f64("t", &["time", "lat"], &[]).unwrap();
            run.append_coordinate("time", 0.0).unwrap();
            run.append_row_f64("t", &[1.0, 2.0]).unwrap();
        }
        // Re-opening the group finds its variables again.
        w.group("run").unwrap().append_row_f64("t", &[3.0, 4.0]).unwrap();
        w.group("run").unwrap().append_coordinate("time", 1.0).unwrap();
        w.finish().unwrap();

        let r = NcReader::open(&path).unwrap();
        assert_eq!(r.group_names().unwrap(), ["run"]);
        assert_eq!(r.var_names().unwrap(), ["lat"]);
        let run = r.group("run").unwrap();
        assert_eq!(run.attr_str("member").unwrap().as_deref(), Some("0"));
        assert_eq!(run.var_names().unwrap(), ["time", "t"]);
        assert_eq!(run.var_dims("t").unwrap(), ["time", "lat"]);
        assert_eq!(run.dim_len("lat").unwrap(), 2);
        assert_eq!(run.read_f64("t").unwrap(), [1.0, 2.0, 3.0, 4.0]);
    }

    #[test]
    fn reader_errors_name_the_file() {
        let dir = TestDir::new("reader");
        let missing = dir.file("missing.nc");
        let e = NcReader::open(&missing).err().expect("must fail");
        assert!(matches!(e, OutputError::NotFound { .. }), "{e}");
        assert!(e.to_string().contains(&missing.display().to_string()), "{e}");
        let text = dir.file("text.nc");
        std::fs::write(&text, "not hdf5").unwrap();
        let e = NcReader::open(&text).err().expect("must fail");
        assert!(matches!(e, OutputError::Open { .. }), "{e}");
        assert!(e.to_string().contains(&text.display().to_string()), "{e}");
    }

    #[test]
    fn lookup3_reproduces_the_superblock_checksum_hdf5_writes() {
        // Reference: the checksum HDF5 itself stored in a file written to disk.
        let dir = TestDir::new("lookup3");
        let path = dir.file("run.nc");
        write_sample(&path, 3).unwrap();
        let bytes = std::fs::read(&path).unwrap();
        assert_eq!(
            bytes[8], 2,
            "superblock version 2 (library-version bounds from 1.8)"
        );
        let stored = u32::from_le_bytes(bytes[44..48].try_into().unwrap());
        assert_eq!(lookup3(&bytes[..44], 0), stored);
        let mut copy = bytes.clone();
        rewrite_superblock_checksum(&mut copy);
        assert_eq!(copy, bytes);
        // Published test vector of lookup3 (hashlittle("", 0) = 0xdeadbeef, Jenkins 2006).
        assert_eq!(lookup3(b"", 0), 0xdead_beef);
    }

    #[test]
    fn in_memory_target_writes_no_file_and_hands_out_a_readable_image() {
        let dir = TestDir::new("memory");
        let target = memory_target("run.nc");
        write_sample(&target, 70).unwrap();
        assert!(!target.exists() && !target.parent().unwrap().exists());
        let image = take_memory_image(&target).expect("a finished image");
        assert_eq!(take_memory_image(&target), None, "taken once");
        // The image must open (it failed with a stale superblock checksum before
        // `rewrite_superblock_checksum`) and equal the file written to disk.
        let on_disk = dir.file("disk.nc");
        write_sample(&on_disk, 70).unwrap();
        let copy = dir.file("image.nc");
        std::fs::write(&copy, &image).unwrap();
        let (a, b) = (NcReader::open(&copy).unwrap(), NcReader::open(&on_disk).unwrap());
        assert_eq!(a.var_names().unwrap(), b.var_names().unwrap());
        for v in ["lat", "lat_bnds", "time", "surface_temperature", "flag"] {
            assert_eq!(a.read_f64(v).unwrap(), b.read_f64(v).unwrap(), "{v}");
        }
        assert_eq!(a.attr_names().unwrap(), b.attr_names().unwrap());
        // A writer dropped unfinished leaves no image.
        let target = memory_target("dropped.nc");
        NcWriter::create(&target).unwrap().abandon();
        assert_eq!(take_memory_image(&target), None);
    }
}

#[cfg(test)]
mod smoke {
    //! Writes the sample file that `tests/python/test_netcdf_writer_smoke.py` opens with
    //! xarray (h5netcdf and netcdf4 engines) and h5py.

    use super::*;

    /// Run by the Python smoke test with `ICEFOLD_NC_SMOKE` set to the output path.
    #[test]
    #[ignore = "writes a file for the Python smoke test"]
    fn write_smoke_sample() {
        let path = PathBuf::from(std::env::var("ICEFOLD_NC_SMOKE").expect("ICEFOLD_NC_SMOKE"));
        let config = format!(
            "# resolved config\ntitle = \"smoke °C\"\n# {}\n",
            "x".repeat(200_000)
        );
        let mut w = NcWriter::create(&path).unwrap();
        w.set_attr_str("Conventions", "CF-1.8").unwrap();
        w.set_attr_str("config", &config).unwrap();
        w.set_attr_f64("solar_constant", 1361.0).unwrap();
        w.set_attr_i64("seed", 7).unwrap();
        let lat = [-67.5, -22.5, 22.5, 67.5];
        let units = |u: &str| ("units", Attr::from(u));
        w.add_coordinate(
            "lat",
            &lat,
            &[units("degrees_north"), ("bounds", "lat_bnds".into())],
        )
        .unwrap();
        w.add_dimension("bnds", 2).unwrap();
        w.add_variable_f64("lat_bnds", &["lat", "bnds"], &[units("degrees_north")])
            .unwrap();
        w.write_f64("lat_bnds", &[-90.0, -45.0, -45.0, 0.0, 0.0, 45.0, 45.0, 90.0])
            .unwrap();
        w.add_unlimited_coordinate("time", &[units("year")]).unwrap();
        w.add_variable_f64(
            "surface_temperature",
            &["time", "lat"],
            &[units("K"), ("standard_name", "surface_temperature".into())],
        )
        .unwrap();
        w.add_variable_i32("stable", &["time"], &[]).unwrap();
        w.add_dimension("tipping", 0).unwrap();
        w.add_variable_f64("tipping_control", &["tipping"], &[]).unwrap();
        for i in 0..100 {
            w.append_coordinate("time", f64::from(i)).unwrap();
            let row: Vec<f64> = lat.iter().map(|l| 288.0 - 0.5 * l.abs() + f64::from(i)).collect();
            w.append_row_f64("surface_temperature", &row).unwrap();
            w.append_row_i32("stable", &[i % 2]).unwrap();
            if i == 49 {
                // What a writer killed right after this flush leaves behind.
                w.flush().unwrap();
                std::fs::copy(w.temp_path(), path.with_extension("killed.nc")).unwrap();
            }
        }
        {
            let mut g = w.group("sweep").unwrap();
            g.set_attr_str("control_key", "solar.scale").unwrap();
            g.add_coordinate("step", &[0.0, 1.0, 2.0], &[]).unwrap();
            g.add_variable_f64("control", &["step"], &[]).unwrap();
            g.write_f64("control", &[0.9, 1.0, 1.1]).unwrap();
            g.add_variable_f64("profile", &["step", "lat"], &[]).unwrap();
            g.write_f64("profile", &[0.0; 12]).unwrap();
        }
        w.finish().unwrap();
    }
}
