//! [`NcReader`]: reads attributes, dimension names, shapes and values from a netCDF-4/HDF5 file
//! such as the ones [`NcWriter`](super::NcWriter) writes.
//!
//! Dimension names come from the dimension scales attached to each axis (netCDF-4
//! convention); a coordinate variable is its own dimension. Placeholder datasets of dimensions
//! without a variable are not listed as variables.

use std::ffi::c_void;
use std::os::raw::{c_int, c_uint};
use std::path::{Path, PathBuf};

use hdf5::types::{TypeDescriptor, VarLenAscii, VarLenUnicode};
use hdf5::{Attribute, Dataset, File, Group, IndexType, IterationOrder, Location, LocationType};
use hdf5_sys::h5::herr_t;
use hdf5_sys::h5i::hid_t;

use super::{ds, OutputError, NOT_A_VARIABLE};

/// Read access to one group (the root group after [`open`](Self::open)) of an HDF5 file.
pub struct NcReader {
    group: Group,
    /// Kept so that the file stays open as long as the reader.
    _file: File,
    path: PathBuf,
}

impl NcReader {
    /// Opens `path` read-only at its root group.
    ///
    /// # Errors
    /// [`OutputError::NotFound`] if there is no such file; [`OutputError::NotAFile`] for a
    /// directory or device; [`OutputError::Open`] if HDF5 cannot
    /// open it (not HDF5, damaged, or locked by a writer that still has it open).
    pub fn open(path: &Path) -> Result<NcReader, OutputError> {
        match std::fs::metadata(path) {
            Err(e) if e.kind() == std::io::ErrorKind::NotFound => {
                return Err(OutputError::NotFound {
                    path: path.to_path_buf(),
                })
            }
            Ok(m) if m.is_dir() => {
                return Err(OutputError::NotAFile {
                    path: path.to_path_buf(),
                    what: "it is a directory",
                })
            }
            Ok(m) if !m.is_file() => {
                return Err(OutputError::NotAFile {
                    path: path.to_path_buf(),
                    what: "it is a device, pipe or socket, not a regular file",
                })
            }
            // Other failures (no permission) are reported by HDF5's open below.
            _ => {}
        }
        let file = File::open(path).map_err(|source| OutputError::Open {
            path: path.to_path_buf(),
            source,
        })?;
        super::close_on_exec(&file);
        let group = file.group("/").map_err(|source| OutputError::Open {
            path: path.to_path_buf(),
            source,
        })?;
        Ok(NcReader {
            group,
            _file: file,
            path: path.to_path_buf(),
        })
    }

    /// The file's path.
    pub fn path(&self) -> &Path {
        &self.path
    }

    /// A reader of the sub-group `name` (a path relative to this group, e.g. `run`).
    pub fn group(&self, name: &str) -> Result<NcReader, OutputError> {
        let group = self
            .group
            .group(name)
            .map_err(self.h5err(format!("group `{name}`")))?;
        Ok(NcReader {
            group,
            _file: self._file.clone(),
            path: self.path.clone(),
        })
    }

    /// Names of the sub-groups of this group, in creation order where the file records it.
    pub fn group_names(&self) -> Result<Vec<String>, OutputError> {
        self.members_of(LocationType::Group)
    }

    /// Names of this group's attributes, in creation order where recorded; bookkeeping
    /// attributes of dimension scales and netCDF-C (`CLASS`, `NAME`, `DIMENSION_LIST`, ...)
    /// are left out.
    pub fn attr_names(&self) -> Result<Vec<String>, OutputError> {
        attr_names(&self.group).map_err(self.h5err(self.group_object()))
    }

    /// A string attribute of this group; `None` if there is no such attribute.
    pub fn attr_str(&self, name: &str) -> Result<Option<String>, OutputError> {
        self.read_attr(&self.group, &self.group_object(), name, read_str)
    }

    /// A numeric (float or integer) attribute of this group as `f64`.
    pub fn attr_f64(&self, name: &str) -> Result<Option<f64>, OutputError> {
        self.read_attr(&self.group, &self.group_object(), name, read_f64_attr)
    }

    /// An integer attribute of this group as `i64`.
    pub fn attr_i64(&self, name: &str) -> Result<Option<i64>, OutputError> {
        self.read_attr(&self.group, &self.group_object(), name, read_i64_attr)
    }

    /// Names of the variables of this group in creation order where recorded (name order
    /// otherwise); placeholder datasets of dimensions without a variable are left out.
    pub fn var_names(&self) -> Result<Vec<String>, OutputError> {
        let mut names = Vec::new();
        for name in self.members_of(LocationType::Dataset)? {
            let ds = self.dataset(&name)?;
            if !is_placeholder(&ds) {
                names.push(name);
            }
        }
        Ok(names)
    }

    /// Names of the dimensions defined in this group (every dimension scale, with or without a
    /// coordinate variable), in creation order where recorded.
    pub fn dim_names(&self) -> Result<Vec<String>, OutputError> {
        let mut names = Vec::new();
        for name in self.members_of(LocationType::Dataset)? {
            if is_scale(&self.dataset(&name)?) {
                names.push(name);
            }
        }
        Ok(names)
    }

    /// Current length of dimension `name`, looked up in this group and then its parents.
    pub fn dim_len(&self, name: &str) -> Result<usize, OutputError> {
        let ds = self.find_dim(name)?;
        Ok(ds.shape().first().copied().unwrap_or(1))
    }

    /// Whether dimension `name` is unlimited (can grow).
    pub fn dim_unlimited(&self, name: &str) -> Result<bool, OutputError> {
        let ds = self.find_dim(name)?;
        let space = ds.space().map_err(self.h5err(format!("dimension `{name}`")))?;
        Ok(space.maxdims().first().is_some_and(Option::is_none))
    }

    /// Dimension names of variable `name`, one per axis: the attached dimension scale; a
    /// coordinate variable's own name; or, with no scale attached, the unique dimension of this
    /// group or its parents with that length, else `phony_dim_<axis>`.
    pub fn var_dims(&self, name: &str) -> Result<Vec<String>, OutputError> {
        let ds = self.dataset(name)?;
        let shape = ds.shape();
        if shape.len() == 1 && is_scale(&ds) {
            return Ok(vec![basename(name).to_owned()]);
        }
        let mut dims = Vec::with_capacity(shape.len());
        for (axis, &len) in shape.iter().enumerate() {
            let found = match attached_scale_name(&ds, axis) {
                Some(n) => n,
                None => self
                    .dim_by_len(len)?
                    .unwrap_or_else(|| format!("phony_dim_{axis}")),
            };
            dims.push(found);
        }
        Ok(dims)
    }

    /// Current shape of variable `name` (empty for a scalar).
    pub fn var_shape(&self, name: &str) -> Result<Vec<usize>, OutputError> {
        Ok(self.dataset(name)?.shape())
    }

    /// All values of a numeric variable as `f64`, row-major (integers are converted).
    pub fn read_f64(&self, name: &str) -> Result<Vec<f64>, OutputError> {
        let ds = self.dataset(name)?;
        if ds.size() == 0 {
            return Ok(Vec::new());
        }
        ds.read_raw::<f64>()
            .map_err(self.h5err(format!("variable `{name}`")))
    }

    /// Names of the attributes of variable `var`, in creation order where recorded, without
    /// the bookkeeping attributes (see [`attr_names`](Self::attr_names)).
    pub fn var_attr_names(&self, var: &str) -> Result<Vec<String>, OutputError> {
        let ds = self.dataset(var)?;
        attr_names(&ds).map_err(self.h5err(format!("variable `{var}`")))
    }

    /// A string attribute of variable `var`; `None` if there is no such attribute.
    pub fn var_attr_str(&self, var: &str, name: &str) -> Result<Option<String>, OutputError> {
        let ds = self.dataset(var)?;
        self.read_attr(&ds, &format!("variable `{var}`"), name, read_str)
    }

    /// A numeric attribute of variable `var` as `f64`.
    pub fn var_attr_f64(&self, var: &str, name: &str) -> Result<Option<f64>, OutputError> {
        let ds = self.dataset(var)?;
        self.read_attr(&ds, &format!("variable `{var}`"), name, read_f64_attr)
    }

    /// An integer attribute of variable `var` as `i64`.
    pub fn var_attr_i64(&self, var: &str, name: &str) -> Result<Option<i64>, OutputError> {
        let ds = self.dataset(var)?;
        self.read_attr(&ds, &format!("variable `{var}`"), name, read_i64_attr)
    }

    fn h5err(&self, object: String) -> impl FnOnce(hdf5::Error) -> OutputError + '_ {
        move |source| OutputError::Hdf5 {
            path: self.path.clone(),
            object,
            source,
        }
    }

    fn group_object(&self) -> String {
        format!("group `{}`", self.group.name())
    }

    fn dataset(&self, name: &str) -> Result<Dataset, OutputError> {
        let is_dataset = matches!(self.group.loc_type_by_name(name), Ok(LocationType::Dataset));
        if !is_dataset {
            return Err(OutputError::UnknownVariable {
                path: self.path.clone(),
                variable: name.to_owned(),
            });
        }
        self.group
            .dataset(name)
            .map_err(self.h5err(format!("variable `{name}`")))
    }

    /// Links of this group of one object type, in creation order if tracked.
    fn members_of(&self, kind: LocationType) -> Result<Vec<String>, OutputError> {
        let names = self
            .group
            .member_names_by(IndexType::CreationOrder, IterationOrder::Increasing)
            .or_else(|_| self.group.member_names())
            .map_err(self.h5err(self.group_object()))?;
        Ok(names
            .into_iter()
            .filter(|n| self.group.loc_type_by_name(n).is_ok_and(|t| t == kind))
            .collect())
    }

    /// The dimension-scale dataset `name` in this group or the nearest parent.
    fn find_dim(&self, name: &str) -> Result<Dataset, OutputError> {
        let mut group = Some(self.group.name());
        while let Some(g) = group {
            let full = if g == "/" {
                format!("/{name}")
            } else {
                format!("{g}/{name}")
            };
            if let Ok(LocationType::Dataset) = self.group.loc_type_by_name(&full) {
                let ds = self
                    .group
                    .dataset(&full)
                    .map_err(self.h5err(format!("`{full}`")))?;
                if is_scale(&ds) {
                    return Ok(ds);
                }
            }
            group = match g.rfind('/') {
                _ if g == "/" => None,
                Some(0) => Some("/".to_owned()),
                Some(i) => Some(g[..i].to_owned()),
                None => None,
            };
        }
        Err(OutputError::NoDimension {
            path: self.path.clone(),
            dimension: name.to_owned(),
        })
    }

    /// The one dimension visible from this group whose length is `len`, if exactly one.
    fn dim_by_len(&self, len: usize) -> Result<Option<String>, OutputError> {
        let mut hits = Vec::new();
        let mut reader = Some(self.group.clone());
        while let Some(g) = reader {
            let r = NcReader {
                group: g.clone(),
                _file: self._file.clone(),
                path: self.path.clone(),
            };
            for name in r.dim_names()? {
                if r.dim_len(&name)? == len && !hits.contains(&name) {
                    hits.push(name);
                }
            }
            let name = g.name();
            reader = if name == "/" {
                None
            } else {
                let parent = match name.rfind('/') {
                    Some(0) | None => "/".to_owned(),
                    Some(i) => name[..i].to_owned(),
                };
                Some(
                    self._file
                        .group(&parent)
                        .map_err(self.h5err(format!("group `{parent}`")))?,
                )
            };
        }
        Ok(if hits.len() == 1 { hits.pop() } else { None })
    }

    fn read_attr<T>(
        &self,
        loc: &Location,
        object: &str,
        name: &str,
        read: fn(&Attribute) -> Result<T, AttrProblem>,
    ) -> Result<Option<T>, OutputError> {
        let names = loc.attr_names().map_err(self.h5err(object.to_owned()))?;
        if !names.iter().any(|n| n == name) {
            return Ok(None);
        }
        let attr = loc
            .attr(name)
            .map_err(self.h5err(format!("{object}, attribute `{name}`")))?;
        match read(&attr) {
            Ok(v) => Ok(Some(v)),
            Err(AttrProblem::Hdf5(source)) => Err(OutputError::Hdf5 {
                path: self.path.clone(),
                object: format!("{object}, attribute `{name}`"),
                source,
            }),
            Err(AttrProblem::Type { found, wanted }) => Err(OutputError::AttrType {
                path: self.path.clone(),
                object: object.to_owned(),
                attribute: name.to_owned(),
                found,
                wanted,
            }),
        }
    }
}

/// Why an attribute could not be read as the type asked for.
enum AttrProblem {
    Hdf5(hdf5::Error),
    Type { found: String, wanted: &'static str },
}

impl From<hdf5::Error> for AttrProblem {
    fn from(e: hdf5::Error) -> Self {
        AttrProblem::Hdf5(e)
    }
}

/// The single value of a scalar or one-element attribute.
fn single<T>(mut values: Vec<T>, wanted: &'static str) -> Result<T, AttrProblem> {
    if values.len() == 1 {
        Ok(values.remove(0))
    } else {
        Err(AttrProblem::Type {
            found: format!("an array of {} values", values.len()),
            wanted,
        })
    }
}

fn read_str(attr: &Attribute) -> Result<String, AttrProblem> {
    const WANTED: &str = "a string";
    match attr.dtype()?.to_descriptor()? {
        TypeDescriptor::VarLenUnicode => Ok(single(attr.read_raw::<VarLenUnicode>()?, WANTED)?
            .as_str()
            .to_owned()),
        TypeDescriptor::VarLenAscii => Ok(single(attr.read_raw::<VarLenAscii>()?, WANTED)?
            .as_str()
            .to_owned()),
        TypeDescriptor::FixedAscii(_) | TypeDescriptor::FixedUnicode(_) => {
            if attr.size() != 1 {
                return Err(AttrProblem::Type {
                    found: format!("an array of {} strings", attr.size()),
                    wanted: WANTED,
                });
            }
            Ok(read_fixed_string(attr)?)
        }
        other => Err(AttrProblem::Type {
            found: other.to_string(),
            wanted: WANTED,
        }),
    }
}

fn read_f64_attr(attr: &Attribute) -> Result<f64, AttrProblem> {
    const WANTED: &str = "a number";
    match attr.dtype()?.to_descriptor()? {
        TypeDescriptor::Float(_) | TypeDescriptor::Integer(_) | TypeDescriptor::Unsigned(_) => {
            single(attr.read_raw::<f64>()?, WANTED)
        }
        other => Err(AttrProblem::Type {
            found: other.to_string(),
            wanted: WANTED,
        }),
    }
}

fn read_i64_attr(attr: &Attribute) -> Result<i64, AttrProblem> {
    const WANTED: &str = "an integer";
    match attr.dtype()?.to_descriptor()? {
        TypeDescriptor::Integer(_) | TypeDescriptor::Unsigned(_) => single(attr.read_raw::<i64>()?, WANTED),
        other => Err(AttrProblem::Type {
            found: other.to_string(),
            wanted: WANTED,
        }),
    }
}

/// Reads one fixed-length string attribute (as written by `H5DSset_scale` or netCDF-C's
/// `NC_CHAR` attributes), trimming trailing NULs.
fn read_fixed_string(attr: &Attribute) -> Result<String, hdf5::Error> {
    use hdf5_sys::h5a::{H5Aget_type, H5Aread};
    use hdf5_sys::h5t::{H5Tclose, H5Tget_size};
    let bytes = hdf5::sync::sync(|| -> Result<Vec<u8>, hdf5::Error> {
        // SAFETY: `attr` is a valid attribute id; the buffer holds one element of the file
        // type, which is also used as the memory type; the type id is closed before return.
        unsafe {
            let tid = H5Aget_type(attr.id());
            if tid < 0 {
                return Err(hdf5::Error::from("cannot get the attribute type"));
            }
            let size = H5Tget_size(tid);
            let mut buf = vec![0u8; size];
            let rc = if size > 0 {
                H5Aread(attr.id(), tid, buf.as_mut_ptr().cast())
            } else {
                0
            };
            H5Tclose(tid);
            if rc < 0 {
                return Err(hdf5::Error::from("cannot read the string attribute"));
            }
            Ok(buf)
        }
    })?;
    let end = bytes.iter().position(|&b| b == 0).unwrap_or(bytes.len());
    Ok(String::from_utf8_lossy(&bytes[..end]).into_owned())
}

/// Attributes that HDF5 dimension scales and netCDF-C keep for themselves; xarray and netCDF
/// readers hide them too.
const BOOKKEEPING_ATTRS: [&str; 8] = [
    "CLASS",
    "NAME",
    "REFERENCE_LIST",
    "DIMENSION_LIST",
    "_Netcdf4Dimid",
    "_Netcdf4Coordinates",
    "_NCProperties",
    "_nc3_strict",
];

/// User attribute names of `loc` in creation order (name order if not recorded).
fn attr_names(loc: &Location) -> hdf5::Result<Vec<String>> {
    let names = loc
        .attr_names_by(IndexType::CreationOrder, IterationOrder::Increasing)
        .or_else(|_| loc.attr_names())?;
    Ok(names
        .into_iter()
        .filter(|n| !BOOKKEEPING_ATTRS.contains(&n.as_str()))
        .collect())
}

fn basename(path: &str) -> &str {
    path.rsplit('/').next().unwrap_or(path)
}

fn is_scale(ds: &Dataset) -> bool {
    // SAFETY: a valid dataset id; the library lock is held.
    hdf5::sync::sync(|| unsafe { ds::H5DSis_scale(ds.id()) }) > 0
}

/// Whether `ds` is netCDF's placeholder for a dimension without a coordinate variable.
fn is_placeholder(ds: &Dataset) -> bool {
    if !is_scale(ds) {
        return false;
    }
    match ds.attr("NAME") {
        Ok(attr) => read_str(&attr).is_ok_and(|s| s.starts_with(NOT_A_VARIABLE)),
        Err(_) => false,
    }
}

/// `H5DSiterate_scales` visitor: stores the link name of the first scale and stops.
unsafe extern "C" fn take_scale_name(_dset: hid_t, _dim: c_uint, scale: hid_t, data: *mut c_void) -> herr_t {
    use hdf5_sys::h5i::H5Iget_name;
    // SAFETY: `data` is the `&mut Option<String>` passed by `attached_scale_name`.
    let out = unsafe { &mut *data.cast::<Option<String>>() };
    // SAFETY: `scale` is a valid id for the duration of the callback.
    let len = unsafe { H5Iget_name(scale, std::ptr::null_mut(), 0) };
    if len <= 0 {
        return 0;
    }
    let mut buf = vec![0u8; len as usize + 1];
    // SAFETY: the buffer holds `len` bytes plus the NUL.
    let got = unsafe { H5Iget_name(scale, buf.as_mut_ptr().cast(), buf.len()) };
    if got <= 0 {
        return 0;
    }
    buf.truncate(got as usize);
    let full = String::from_utf8_lossy(&buf).into_owned();
    *out = Some(basename(&full).to_owned());
    1
}

/// Name of the first dimension scale attached to `axis` of `ds`, if any.
fn attached_scale_name(ds: &Dataset, axis: usize) -> Option<String> {
    let mut found: Option<String> = None;
    let mut idx: c_int = 0;
    let axis = c_uint::try_from(axis).ok()?;
    // SAFETY: valid dataset id; `found` outlives the call; the library lock is held while the
    // visitor runs.
    hdf5::sync::sync(|| unsafe {
        ds::H5DSiterate_scales(
            ds.id(),
            axis,
            &mut idx,
            Some(take_scale_name),
            (&mut found as *mut Option<String>).cast(),
        )
    });
    found
}
