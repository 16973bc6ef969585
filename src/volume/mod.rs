//! Voxel volumes in and out: memory limits for readers, crash-safe output files and length
//! units. (Readers, segmentation and writers follow.)

mod atomic;
mod limits;
mod units;

pub(crate) use atomic::one_line;
pub use atomic::{output_error, write_atomically};
pub use limits::{ReadLimits, available_memory_bytes, bytes_for};
pub use units::{ACCEPTED_UNITS, format_length, parse_length, unit_to_metres};
