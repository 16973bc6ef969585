//! The steady flow field as VTK XML image data (`.vti`), for ParaView or any VTK-based viewer.
//!
//! One cell per sample voxel (or per `stride`-th voxel along each axis), so pores and grains keep
//! their voxel shape and every value sits where the solver computed it. Only the original sample
//! is written: the mirror image or buffer slabs the solver added along the flow axis are cut away
//! and the origin is the sample's corner in the original image (a crop's start), so the field
//! overlays the full scan.
//!
//! # Units: Stokes scaling, not lattice units
//! A lattice velocity becomes m/s only given the fluid's viscosity and the lattice time step, and
//! a permeability run fixes neither: Stokes flow is linear in the drive, so only the *shape* of the
//! field is a property of the sample. The file therefore holds the field scaled by the run's own
//! Darcy (superficial) velocity U along the flow axis (Σ u_axis over the sample / sample voxels,
//! the ⟨u⟩ of k = ν⟨u⟩/g, see analysis/flow.rs):
//! - `velocity` = u / U (dimensionless; its flow-axis component averages to 1 over all cells at
//!   stride 1). Multiply by a Darcy velocity in m/s (flow rate / cross-section) to get m/s.
//! - `pressure` = (p − p̄) Δx / (μ U) with p = c_s² ρ (c_s² = 1/3, the D3Q19 equation of state:
//!   Qian, d'Humières & Lallemand 1992, Europhys. Lett. 17, 479, from memory) and
//!   p̄ the mean over the sample's fluid nodes; in lattice units (Δx = 1, μ = ν at ρ₀ = 1) that
//!   is c_s²(ρ − ρ̄)/(ν U). Multiply by μ U / Δx to get Pa. It is the deviation from the mean
//!   only: the uniform gradient the body force stands for is not in it.
//! - `speed` = |velocity|; `pore` = 1 where the solver had fluid (the connected pore space: pores
//!   the connectivity filter dropped show 0), 0 elsewhere; solid cells have zero velocity.
//!
//! The FieldData block records this in a `units` string plus the numbers needed to undo the
//! scaling (`darcy_velocity_lattice`, `viscosity_lattice`, `body_force_lattice`, `voxel_size_m`,
//! `stride`, `flow_axis`). vtkio 0.6.3 drops field data when writing XML (its src/xml.rs,
//! `AttributeData::from_model_attributes`: "Field attributes are not supported"), so that block
//! is inserted into vtkio's output stream right after the `<ImageData …>` start tag, in the
//! ASCII layout VTK's own XML writer uses (strings as byte codes ending in 0).
//!
//! Spacing is the voxel size × stride in metres when the voxel size is known, else 1 per voxel.
//!
//! Memory: vtkio builds the whole document in memory, about [`PEAK_BYTES_PER_CELL`] bytes per
//! cell, so the writer checks [`memory_estimate`] against a cap before building anything and
//! names the stride that would fit.

use std::io::{self, Write};
use std::path::Path;

use vtkio::model::{
    Attribute, Attributes, ByteOrder, DataSet, Extent, ImageDataPiece, Piece, Version, Vtk,
};

use crate::analysis::KeptField;
use crate::lbm::d3q19::CS2;
use crate::lbm::domain::SOLID;
use crate::{Error, Result};

/// Bytes of the four cell arrays per cell: velocity 3 × f32, speed f32, pressure f32, pore u8.
pub const ARRAY_BYTES_PER_CELL: u64 = 3 * 4 + 4 + 4 + 1;

/// Peak bytes the writer holds per cell, far above the 21 bytes of the arrays: vtkio 0.6.3 turns
/// every array into base64 text (4/3 of its bytes) before writing, and its XML serializer
/// (src/xml/se/var.rs) builds each element's children in a buffer of its own and copies them
/// into the parent's, so the text exists several times over until the document is complete.
/// Measured here as the rise of the process's peak resident memory during a write: 147, 123 and
/// 115 bytes per cell for 100³, 160³ and 200³ cells; 160 leaves a margin.
pub const PEAK_BYTES_PER_CELL: u64 = 160;

/// Default cap on the writer's peak memory: 4 GiB, i.e. about 300³ cells (a 512³ sample fits at
/// stride 2).
pub const DEFAULT_MAX_BYTES: u64 = 4 << 30;

/// Cells of the written image for a sample of `sample_shape` at `stride`: ⌈n / stride⌉ per axis,
/// so the last cell along an axis may stand for fewer than `stride` voxels.
pub fn output_shape(sample_shape: [usize; 3], stride: usize) -> [usize; 3] {
    sample_shape.map(|n| n.div_ceil(stride.max(1)))
}

/// Peak writer memory in bytes for a sample of `sample_shape` at `stride`, or `None` on overflow.
pub fn memory_estimate(sample_shape: [usize; 3], stride: usize) -> Option<u64> {
    let m = output_shape(sample_shape, stride);
    (m[0] as u64)
        .checked_mul(m[1] as u64)?
        .checked_mul(m[2] as u64)?
        .checked_mul(PEAK_BYTES_PER_CELL)
}

/// Writes the kept flow field to `path` (a `.vti` file) with the default memory cap
/// [`DEFAULT_MAX_BYTES`]. See the module documentation for fields and units.
pub fn write_vti(
    path: &Path,
    kept: &KeptField,
    voxel_size_m: Option<f64>,
    stride: usize,
) -> Result<()> {
    write_vti_with_limit(path, kept, voxel_size_m, stride, [0; 3], DEFAULT_MAX_BYTES)
}

/// As [`write_vti`], with the sample's first voxel at `origin_voxels` of the original image (a
/// crop's start, so the field overlays the full scan in a viewer), refusing with
/// [`Error::TooLarge`] (naming a stride that fits) when the writer's peak memory
/// ([`memory_estimate`]) would exceed `max_bytes`.
pub fn write_vti_with_limit(
    path: &Path,
    kept: &KeptField,
    voxel_size_m: Option<f64>,
    stride: usize,
    origin_voxels: [usize; 3],
    max_bytes: u64,
) -> Result<()> {
    if stride == 0 {
        return Err(Error::Usage("the VTK stride must be at least 1".into()));
    }
    if let Some(dx) = voxel_size_m.filter(|dx| !(dx.is_finite() && *dx > 0.0)) {
        return Err(Error::Usage(format!(
            "voxel size {dx} m is not a positive number"
        )));
    }
    check_destination(path)?;
    let domain = &kept.domain;
    let field = &kept.field;
    let grid_voxels = domain.shape.iter().product::<usize>();
    if field.velocity.len() != domain.fluid_nodes()
        || field.density.len() != domain.fluid_nodes()
        || domain.node_of_voxel.len() != grid_voxels
        || (0..3).any(|d| domain.sample_origin[d] + domain.sample_shape[d] > domain.shape[d])
    {
        return Err(Error::Internal(format!(
            "flow field ({} velocities, {} densities) does not fit its domain ({} fluid nodes,              {} of {} voxels mapped, sample {:?} at {:?} in grid {:?})",
            field.velocity.len(),
            field.density.len(),
            domain.fluid_nodes(),
            domain.node_of_voxel.len(),
            grid_voxels,
            domain.sample_shape,
            domain.sample_origin,
            domain.shape
        )));
    }
    let shape = output_shape(domain.sample_shape, stride);
    let need = memory_estimate(domain.sample_shape, stride).unwrap_or(u64::MAX);
    if need > max_bytes {
        return Err(too_large(domain.sample_shape, stride, need, max_bytes));
    }

    let scale = Scale::of(kept).ok_or_else(|| Error::Output {
        path: path.to_path_buf(),
        msg: format!(
            "the flow field carries no net flow along {} (Darcy velocity 0 or not finite), so \
             it cannot be scaled for the VTK file",
            domain.axis
        ),
    })?;
    let arrays = cell_arrays(kept, &scale, stride, shape);
    let voxel = voxel_size_m.unwrap_or(1.0);
    let spacing = voxel * stride as f64;
    let origin = origin_voxels.map(|o| (o as f64 * voxel) as f32);
    let field_data = field_data_xml(kept, &scale, voxel_size_m, stride);
    let vtk = image_vtk(shape, spacing, origin, arrays);

    crate::volume::write_atomically(path, |w| {
        let mut out = InsertAfterImageDataTag::new(&mut *w, field_data.into_bytes());
        vtk.write_xml(&mut out).map_err(|e| Error::Output {
            path: path.to_path_buf(),
            msg: format!("writing VTK XML failed: {e}"),
        })?;
        if !out.inserted() {
            return Err(Error::Internal(
                "vtkio wrote no <ImageData> element to attach the field data to".into(),
            ));
        }
        Ok(())
    })
}

/// The numbers the field is scaled by.
struct Scale {
    /// Darcy velocity along the flow axis, lattice units.
    darcy_velocity: f64,
    /// Mean density over the sample's fluid nodes.
    mean_density: f64,
}

impl Scale {
    fn of(kept: &KeptField) -> Option<Scale> {
        let domain = &kept.domain;
        let a = domain.axis.index();
        let mut sum_u = 0.0f64;
        let mut sum_rho = 0.0f64;
        let mut n = 0usize;
        for (k, (u, &rho)) in kept
            .field
            .velocity
            .iter()
            .zip(&kept.field.density)
            .enumerate()
        {
            if domain.in_sample(k) {
                sum_u += u[a] as f64;
                sum_rho += rho as f64;
                n += 1;
            }
        }
        let voxels = domain.sample_shape.iter().product::<usize>() as f64;
        let darcy_velocity = sum_u / voxels;
        (n > 0 && darcy_velocity.is_finite() && darcy_velocity != 0.0).then(|| Scale {
            darcy_velocity,
            mean_density: sum_rho / n as f64,
        })
    }
}

/// velocity, speed, pressure, pore, one entry per output cell, x fastest (VTK's cell order).
struct CellArrays {
    velocity: Vec<f32>,
    speed: Vec<f32>,
    pressure: Vec<f32>,
    pore: Vec<u8>,
}

fn cell_arrays(kept: &KeptField, scale: &Scale, stride: usize, shape: [usize; 3]) -> CellArrays {
    let domain = &kept.domain;
    let field = &kept.field;
    let cells = shape.iter().product::<usize>();
    let mut out = CellArrays {
        velocity: Vec::with_capacity(3 * cells),
        speed: Vec::with_capacity(cells),
        pressure: Vec::with_capacity(cells),
        pore: Vec::with_capacity(cells),
    };
    let u_scale = 1.0 / scale.darcy_velocity;
    let p_scale = CS2 / (field.viscosity * scale.darcy_velocity);
    let [gx, gy, _] = domain.shape;
    let o = domain.sample_origin;
    for k in 0..shape[2] {
        for j in 0..shape[1] {
            for i in 0..shape[0] {
                let g = [i * stride + o[0], j * stride + o[1], k * stride + o[2]];
                let node = domain.node_of_voxel[g[0] + gx * (g[1] + gy * g[2])];
                if node == SOLID {
                    out.velocity.extend_from_slice(&[0.0; 3]);
                    out.speed.push(0.0);
                    out.pressure.push(0.0);
                    out.pore.push(0);
                    continue;
                }
                let u = field.velocity[node as usize].map(|c| (c as f64 * u_scale) as f32);
                out.velocity.extend_from_slice(&u);
                out.speed
                    .push((u[0] * u[0] + u[1] * u[1] + u[2] * u[2]).sqrt());
                let drho = field.density[node as usize] as f64 - scale.mean_density;
                out.pressure.push((drho * p_scale) as f32);
                out.pore.push(1);
            }
        }
    }
    out
}

fn image_vtk(shape: [usize; 3], spacing: f64, origin: [f32; 3], arrays: CellArrays) -> Vtk {
    let extent = || Extent::Ranges(shape.map(|n| 0..=n as i32));
    let cell = vec![
        Attribute::vectors("velocity").with_data(arrays.velocity),
        Attribute::scalars("speed", 1).with_data(arrays.speed),
        Attribute::scalars("pressure", 1).with_data(arrays.pressure),
        Attribute::scalars("pore", 1).with_data(arrays.pore),
    ];
    Vtk {
        // 1.0 is the first VTK XML version with 64-bit block headers, which vtkio writes.
        version: Version::new((1, 0)),
        title: String::new(),
        byte_order: ByteOrder::LittleEndian,
        file_path: None,
        data: DataSet::ImageData {
            extent: extent(),
            origin,
            spacing: [spacing as f32; 3],
            meta: None,
            pieces: vec![Piece::Inline(Box::new(ImageDataPiece {
                extent: extent(),
                data: Attributes {
                    point: Vec::new(),
                    cell,
                },
            }))],
        },
    }
}

/// The `<FieldData>` block: how to read the file, and the numbers that undo the scaling.
fn field_data_xml(
    kept: &KeptField,
    scale: &Scale,
    voxel_size_m: Option<f64>,
    stride: usize,
) -> String {
    let axis = kept.domain.axis;
    let g = kept.field.force[axis.index()];
    let units = format!(
        "velocity = u / U with U = darcy_velocity_lattice, the superficial velocity along {axis} \
         (dimensionless: multiply by a Darcy velocity in m/s); pressure = (p - mean p) dx / (mu U) \
         with p = rho / 3 (multiply by mu U / dx for Pa; the mean gradient of the body force is \
         not included); speed = |velocity|; pore = 1 for connected pore voxels; cells sample one voxel \
         in {stride} along each axis; spacing in {}",
        if voxel_size_m.is_some() {
            "metres"
        } else {
            "voxels"
        }
    );
    let mut xml = String::from("\n<FieldData>\n");
    string_array(&mut xml, "units", &units);
    string_array(&mut xml, "flow_axis", &axis.to_string());
    float_array(&mut xml, "darcy_velocity_lattice", scale.darcy_velocity);
    float_array(&mut xml, "viscosity_lattice", kept.field.viscosity);
    float_array(&mut xml, "body_force_lattice", g);
    float_array(&mut xml, "stride", stride as f64);
    if let Some(dx) = voxel_size_m {
        float_array(&mut xml, "voxel_size_m", dx);
    }
    xml.push_str("</FieldData>\n");
    xml
}

/// A one-value string array in VTK's ASCII layout: the bytes as decimal codes, then 0.
fn string_array(xml: &mut String, name: &str, value: &str) {
    let codes: Vec<String> = value.bytes().map(|b| b.to_string()).collect();
    xml.push_str(&format!(
        "<Array type=\"String\" Name=\"{name}\" NumberOfTuples=\"1\" format=\"ascii\">{} 0</Array>\n",
        codes.join(" ")
    ));
}

fn float_array(xml: &mut String, name: &str, value: f64) {
    xml.push_str(&format!(
        "<DataArray type=\"Float64\" Name=\"{name}\" NumberOfTuples=\"1\" format=\"ascii\">{value:e}</DataArray>\n"
    ));
}

fn too_large(sample: [usize; 3], stride: usize, need: u64, limit: u64) -> Error {
    let m = output_shape(sample, stride);
    let largest = sample.iter().copied().max().unwrap_or(1).max(1);
    let fits =
        (stride + 1..=largest).find(|&s| memory_estimate(sample, s).is_some_and(|b| b <= limit));
    let hint = match fits {
        Some(s) => format!("; --vtk-stride {s} would fit"),
        None => String::new(),
    };
    Error::TooLarge {
        what: format!(
            "the VTK file of {}x{}x{} cells (stride {stride}{hint})",
            m[0], m[1], m[2]
        ),
        needed_bytes: need,
        limit_bytes: limit,
    }
}

/// Fails early, before any work, when the name of a file is not `.vti` (viewers pick the reader
/// by extension; a pipe or device has no such reader) or the file could not be written (the shared output check: folder missing or
/// not writable, a folder, a link to nothing).
fn check_destination(path: &Path) -> Result<()> {
    let is_vti = path
        .extension()
        .and_then(|e| e.to_str())
        .is_some_and(|e| e.eq_ignore_ascii_case("vti"));
    if !is_vti && !crate::volume::is_pipe_or_device(path) {
        return Err(Error::Output {
            path: path.to_path_buf(),
            msg: "a VTK image-data file needs the .vti extension".into(),
        });
    }
    crate::volume::check_destination(path)
}

/// Passes bytes through and inserts `payload` right after the first `<ImageData …>` start tag,
/// where VTK expects a data set's FieldData. The tag's attributes are numbers, so the first `>`
/// after `<ImageData` closes it.
struct InsertAfterImageDataTag<W> {
    inner: W,
    payload: Option<Vec<u8>>,
    matched: usize,
    in_tag: bool,
}

const IMAGE_DATA_TAG: &[u8] = b"<ImageData";

impl<W: Write> InsertAfterImageDataTag<W> {
    fn new(inner: W, payload: Vec<u8>) -> Self {
        InsertAfterImageDataTag {
            inner,
            payload: Some(payload),
            matched: 0,
            in_tag: false,
        }
    }

    fn inserted(&self) -> bool {
        self.payload.is_none()
    }
}

impl<W: Write> Write for InsertAfterImageDataTag<W> {
    fn write(&mut self, buf: &[u8]) -> io::Result<usize> {
        if self.payload.is_none() {
            return self.inner.write(buf);
        }
        for (i, &b) in buf.iter().enumerate() {
            if self.in_tag {
                if b == b'>' {
                    self.inner.write_all(&buf[..=i])?;
                    if let Some(p) = self.payload.take() {
                        self.inner.write_all(&p)?;
                    }
                    self.inner.write_all(&buf[i + 1..])?;
                    return Ok(buf.len());
                }
            } else if b == IMAGE_DATA_TAG[self.matched] {
                self.matched += 1;
                self.in_tag = self.matched == IMAGE_DATA_TAG.len();
            } else {
                self.matched = usize::from(b == IMAGE_DATA_TAG[0]);
            }
        }
        self.inner.write_all(buf)?;
        Ok(buf.len())
    }

    fn flush(&mut self) -> io::Result<()> {
        self.inner.flush()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn field_data_goes_right_after_the_image_data_tag_even_when_split_across_writes() {
        let doc =
            b"<VTKFile type=\"ImageData\"><ImageData WholeExtent=\"0 1\"><Piece/></ImageData>";
        for cut in [3usize, 12, 30, 40] {
            let mut out = Vec::new();
            let mut w = InsertAfterImageDataTag::new(&mut out, b"<FD/>".to_vec());
            w.write_all(&doc[..cut]).unwrap();
            w.write_all(&doc[cut..]).unwrap();
            assert!(w.inserted(), "cut {cut}");
            let text = String::from_utf8(out).unwrap();
            assert_eq!(
                text,
                "<VTKFile type=\"ImageData\"><ImageData WholeExtent=\"0 1\"><FD/><Piece/></ImageData>",
                "cut {cut}"
            );
        }
    }

    #[test]
    fn nothing_is_inserted_without_an_image_data_tag() {
        let mut out = Vec::new();
        let mut w = InsertAfterImageDataTag::new(&mut out, b"<FD/>".to_vec());
        w.write_all(b"<VTKFile type=\"ImageData\"><Image Data>")
            .unwrap();
        assert!(!w.inserted());
        assert_eq!(out, b"<VTKFile type=\"ImageData\"><Image Data>");
    }

    #[test]
    fn output_shape_rounds_up_and_memory_grows_with_cells() {
        assert_eq!(output_shape([8, 9, 4], 1), [8, 9, 4]);
        assert_eq!(output_shape([8, 9, 4], 2), [4, 5, 2]);
        assert_eq!(
            memory_estimate([8, 9, 4], 1),
            Some(8 * 9 * 4 * PEAK_BYTES_PER_CELL)
        );
        // 512³ at stride 1 is over the default cap, at stride 2 under it.
        assert!(memory_estimate([512; 3], 1).unwrap() > DEFAULT_MAX_BYTES);
        assert!(memory_estimate([512; 3], 2).unwrap() < DEFAULT_MAX_BYTES);
        assert_eq!(memory_estimate([usize::MAX; 3], 1), None);
    }

    #[test]
    fn too_large_names_a_stride_that_fits() {
        let need = memory_estimate([512; 3], 1).unwrap();
        let msg = too_large([512; 3], 1, need, DEFAULT_MAX_BYTES).to_string();
        assert!(msg.contains("512x512x512 cells"), "{msg}");
        assert!(msg.contains("--vtk-stride 2 would fit"), "{msg}");
    }

    #[test]
    fn string_arrays_use_byte_codes_ending_in_zero() {
        let mut xml = String::new();
        string_array(&mut xml, "n", "ab c");
        assert!(xml.contains(">97 98 32 99 0</Array>"), "{xml}");
    }
}
