//! netCDF-4-compatible HDF5 output: a writer for run, sweep and branch files and a reader for
//! the commands that inspect, plot and merge them.
//!
//! The files follow the netCDF-4 conventions for HDF5 (reference: the netCDF-C "NetCDF-4
//! Format" specification, from memory): every dimension is an HDF5 dimension scale, either a
//! coordinate variable of the same name or a placeholder dataset whose `NAME` attribute says
//! "This is a netCDF dimension but not a netCDF variable."; variables carry their dimensions as
//! attached scales; groups track link and attribute creation order; strings are variable-length
//! UTF-8. `xarray.open_dataset(f, engine="h5netcdf")` and `engine="netcdf4"` both open them.
//!
//! [`NcWriter`] writes into a temporary file beside the target and renames it onto the target
//! only in [`NcWriter::finish`], so a failed or interrupted run never leaves a half-written file
//! at the target path. [`NcReader`] reads attributes, dimension names, shapes and values back.
//!
//! ```
//! use icefold::output::{Attr, NcReader, NcWriter};
//! # fn main() -> Result<(), icefold::output::OutputError> {
//! let path = std::env::temp_dir().join(format!("icefold-doc-{}.nc", std::process::id()));
//! let mut w = NcWriter::create(&path)?;
//! w.set_attr_str("title", "demo")?;
//! w.add_coordinate("lat", &[-45.0, 45.0], &[("units", Attr::from("degrees_north"))])?;
//! w.add_unlimited_coordinate("time", &[("units", Attr::from("year"))])?;
//! w.add_variable_f64("surface_temperature", &["time", "lat"], &[("units", Attr::from("K"))])?;
//! for year in 0..3 {
//!     w.append_coordinate("time", f64::from(year))?;
//!     w.append_row_f64("surface_temperature", &[270.0, 271.0])?;
//! }
//! w.finish()?;
//! let r = NcReader::open(&path)?;
//! assert_eq!(r.var_dims("surface_temperature")?, ["time", "lat"]);
//! assert_eq!(r.read_f64("time")?, [0.0, 1.0, 2.0]);
//! # drop(r);
//! # std::fs::remove_file(&path).unwrap();
//! # Ok(())
//! # }
//! ```

pub mod branches_file;
pub mod common;
pub mod damage;
pub mod ensemble_file;
pub mod equilibrium_file;
mod reader;
pub mod regimes_file;
pub mod run_file;
pub mod summary;
pub mod sweep_file;
mod writer;

pub use reader::NcReader;
pub use writer::{
    forbid_replacing, memory_target, take_memory_image, Attr, NcGroup, NcWriter, DEFAULT_DEFLATE_LEVEL,
    MAX_DEFLATE_LEVEL,
};

use std::path::PathBuf;

/// Prefix of the `NAME` attribute that netCDF-C gives a dimension without a coordinate
/// variable; readers recognise such placeholder datasets by it.
pub(crate) const NOT_A_VARIABLE: &str = "This is a netCDF dimension but not a netCDF variable.";

/// Errors from writing or reading an output file. Every variant names the file and, where
/// there is one, the variable, dimension or attribute concerned.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum OutputError {
    /// The directory that should hold the output does not exist or is not a directory.
    #[error("cannot write {path}: {dir} {problem}")]
    NoDirectory {
        /// The requested output file.
        path: PathBuf,
        /// Its parent directory.
        dir: PathBuf,
        /// "does not exist" or "is a file, not a directory".
        problem: &'static str,
    },
    /// A deflate level outside 0 to [`MAX_DEFLATE_LEVEL`] was asked for.
    #[error("cannot write {path}: deflate level {level} is not one of 0 to 9")]
    DeflateLevel {
        /// The requested output file.
        path: PathBuf,
        /// The level asked for.
        level: u8,
    },
    /// HDF5 could not create the temporary file beside the target.
    #[error("cannot create output file {path} (temporary file {temp}): {source}")]
    Create {
        /// The requested output file.
        path: PathBuf,
        /// The temporary file that was being created.
        temp: PathBuf,
        /// The HDF5 error.
        source: hdf5::Error,
    },
    /// The finished temporary file could not be renamed onto the target.
    #[error("cannot move finished output {temp} onto {path}: {source}")]
    Rename {
        /// The requested output file.
        path: PathBuf,
        /// The temporary file.
        temp: PathBuf,
        /// The I/O error.
        source: std::io::Error,
    },
    /// The target appeared while the job ran (another writer finished first) and no
    /// replacing was permitted: it is kept as it is.
    #[error("output file {} appeared while this job ran (another icefold writing the same file?) and is kept as it is; {}; pass --overwrite to replace it", .path.display(), match .kept { Some(k) => format!("this job's result is in {}", k.display()), None => "this job's result could not be kept and was deleted".to_string() })]
    Exists {
        /// The requested output file.
        path: PathBuf,
        /// Where this job's finished file was moved instead, if that worked.
        kept: Option<PathBuf>,
    },
    /// The file does not exist (reading).
    #[error("cannot open {path}: no such file")]
    NotFound {
        /// The file asked for.
        path: PathBuf,
    },
    /// An HDF5 file without the `icefold_kind` attribute: not written by icefold.
    #[error("{path} is not an icefold file (it has no `icefold_kind` attribute); icefold reads only the files it writes")]
    Foreign {
        /// The file.
        path: PathBuf,
    },
    /// An icefold file whose content cannot be what icefold wrote.
    #[error("{path} is damaged: {problem}")]
    Damaged {
        /// The file.
        path: PathBuf,
        /// What is wrong, naming the variable.
        problem: String,
    },
    /// The path exists but is no regular file (reading).
    #[error("cannot open {path}: {what}; give an icefold output file")]
    NotAFile {
        /// The path asked for.
        path: PathBuf,
        /// What it is instead.
        what: &'static str,
    },
    /// The file exists but HDF5 cannot open it (not HDF5, truncated, or locked by a writer).
    #[error("cannot open {path} as HDF5 (not an HDF5 file, damaged, or still open for writing): {source}")]
    Open {
        /// The file asked for.
        path: PathBuf,
        /// The HDF5 error.
        source: hdf5::Error,
    },
    /// An HDF5 call on one object of the file failed.
    #[error("{path}: {object}: {source}")]
    Hdf5 {
        /// The file.
        path: PathBuf,
        /// The object concerned, e.g. "variable `time`" or "attribute `title`".
        object: String,
        /// The HDF5 error.
        source: hdf5::Error,
    },
    /// Making a dataset a dimension scale, or attaching one, failed in libhdf5_hl.
    #[error("{path}: variable `{variable}`: cannot {action} dimension scale `{dimension}`")]
    Scale {
        /// The file.
        path: PathBuf,
        /// The variable concerned.
        variable: String,
        /// The dimension concerned.
        dimension: String,
        /// "create" or "attach".
        action: &'static str,
    },
    /// A name is empty, contains `/` or a NUL, or is already used in its group.
    #[error("{path}: invalid name `{name}`: {reason}")]
    InvalidName {
        /// The file.
        path: PathBuf,
        /// The offending name.
        name: String,
        /// Why it is refused.
        reason: &'static str,
    },
    /// A variable refers to a dimension that was not defined in its group or a parent group.
    #[error("{path}: variable `{variable}`: unknown dimension `{dimension}`")]
    UnknownDimension {
        /// The file.
        path: PathBuf,
        /// The variable concerned.
        variable: String,
        /// The missing dimension.
        dimension: String,
    },
    /// No dimension of this name exists in the group or its parents (reading).
    #[error("{path}: no dimension `{dimension}`")]
    NoDimension {
        /// The file.
        path: PathBuf,
        /// The missing dimension.
        dimension: String,
    },
    /// A string attribute value contains a NUL character, which HDF5 strings cannot hold.
    #[error("{path}: {object}: attribute `{attribute}` contains a NUL character")]
    NulInString {
        /// The file.
        path: PathBuf,
        /// The object holding the attribute.
        object: String,
        /// The attribute name.
        attribute: String,
    },
    /// No variable of this name exists in the group.
    #[error("{path}: no variable `{variable}`")]
    UnknownVariable {
        /// The file.
        path: PathBuf,
        /// The missing variable.
        variable: String,
    },
    /// Data of the wrong length for the variable (whole write) or for one record (append).
    #[error("{path}: variable `{variable}`: expected {expected} values, got {actual}")]
    LengthMismatch {
        /// The file.
        path: PathBuf,
        /// The variable concerned.
        variable: String,
        /// Number of values the variable (or one record of it) holds.
        expected: usize,
        /// Number of values given.
        actual: usize,
    },
    /// The variable's layout does not allow the requested operation.
    #[error("{path}: variable `{variable}`: {reason}")]
    Layout {
        /// The file.
        path: PathBuf,
        /// The variable concerned.
        variable: String,
        /// What is wrong, e.g. "not along an unlimited dimension".
        reason: String,
    },
    /// An attribute exists but has a type or shape the caller did not ask for.
    #[error("{path}: {object}: attribute `{attribute}` is {found}, not {wanted}")]
    AttrType {
        /// The file.
        path: PathBuf,
        /// The object holding the attribute ("the file" or "variable `x`").
        object: String,
        /// The attribute name.
        attribute: String,
        /// What was found.
        found: String,
        /// What was asked for.
        wanted: &'static str,
    },
}

/// Declarations of the few libhdf5_hl dimension-scale functions used here; hdf5-metno binds
/// none of them. Call them only inside `hdf5::sync::sync`, which holds the library lock.
///
/// Reference: HDF5 High-Level "Dimension Scales" API (H5DSpublic.h), signatures from HDF5 1.10.
pub(crate) mod ds {
    use hdf5_sys::h5::{herr_t, htri_t};
    use hdf5_sys::h5i::hid_t;
    use std::os::raw::{c_char, c_int, c_uint, c_void};

    /// Visitor for `H5DSiterate_scales`: dataset, axis, scale, user data; non-zero stops.
    pub type IterateFn =
        unsafe extern "C" fn(dset: hid_t, dim: c_uint, scale: hid_t, data: *mut c_void) -> herr_t;

    extern "C" {
        /// Makes `dsid` a dimension scale named `dimname` (sets CLASS and NAME).
        pub fn H5DSset_scale(dsid: hid_t, dimname: *const c_char) -> herr_t;
        /// Attaches scale `dsid` to axis `idx` of dataset `did`.
        pub fn H5DSattach_scale(did: hid_t, dsid: hid_t, idx: c_uint) -> herr_t;
        /// Positive if `did` is a dimension scale.
        pub fn H5DSis_scale(did: hid_t) -> htri_t;
        /// Calls `visitor` for each scale attached to axis `dim` of `did`.
        pub fn H5DSiterate_scales(
            did: hid_t,
            dim: c_uint,
            idx: *mut c_int,
            visitor: Option<IterateFn>,
            visitor_data: *mut c_void,
        ) -> herr_t;
    }
}

/// Mark the operating-system descriptor of an open HDF5 file close-on-exec. HDF5 (sec2 driver,
/// the default) opens files without `O_CLOEXEC`, so a child process started while a file is
/// open would inherit the descriptor and, with it, HDF5's lock on the file until the child
/// exits: a reader in the parent would then be refused with "unable to lock file". Best effort
/// (a driver without a plain descriptor is left as it is).
pub(crate) fn close_on_exec(file: &hdf5::File) {
    hdf5::sync::sync(|| {
        let mut handle: *mut std::ffi::c_void = std::ptr::null_mut();
        // SAFETY: a valid file id; for the sec2 driver the handle points to its `int` fd.
        unsafe {
            if hdf5_sys::h5f::H5Fget_vfd_handle(file.id(), hdf5_sys::h5p::H5P_DEFAULT, &mut handle) >= 0
                && !handle.is_null()
            {
                let fd = *(handle as *const libc::c_int);
                let flags = libc::fcntl(fd, libc::F_GETFD);
                if flags >= 0 {
                    libc::fcntl(fd, libc::F_SETFD, flags | libc::FD_CLOEXEC);
                }
            }
        }
    });
}
