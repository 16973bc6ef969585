//! Segmentation: turning voxel values into a pore mask, either by pore labels (already
//! segmented images) or by a grey-value threshold. A pore label that never occurs is refused,
//! since it silently yields an all-solid sample otherwise.

use std::fmt;

use super::crop::Crop;
use super::{Volume, VoxelData};
use crate::geometry::PoreMask;
use crate::{Error, Result};

/// How voxel values map to pore (true) and solid (false).
#[derive(Clone, Debug, PartialEq)]
pub enum Segmentation {
    /// Voxels whose value equals one of these labels are pore; all others are solid.
    Labels(Vec<u32>),
    /// Pore where the value is strictly below `t` (`pore_below`) or strictly above it;
    /// a value equal to `t` and NaN are solid.
    Threshold { t: f64, pore_below: bool },
}

impl Default for Segmentation {
    /// Label 0 is pore: the usual convention for segmented scans (pore space black).
    fn default() -> Self {
        Segmentation::Labels(vec![0])
    }
}

impl Segmentation {
    /// Parses a comma-separated label list such as "0" or "0,3,7".
    pub fn parse_labels(s: &str) -> Result<Segmentation> {
        let labels = s
            .split(',')
            .map(|p| {
                p.trim().parse::<u32>().map_err(|_| {
                    Error::Usage(format!(
                        "bad pore label '{}' in '{s}' (expected whole numbers like 0,3)",
                        p.trim()
                    ))
                })
            })
            .collect::<Result<Vec<_>>>()?;
        Ok(Segmentation::Labels(labels))
    }

    /// One line for reports, e.g. "pore labels 0, 3" or "pore where value < 120".
    pub fn describe(&self) -> String {
        self.to_string()
    }
}

impl fmt::Display for Segmentation {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Segmentation::Labels(l) => write!(f, "pore labels {}", join(l.iter())),
            Segmentation::Threshold { t, pore_below } => {
                write!(
                    f,
                    "pore where value {} {t}",
                    if *pore_below { "<" } else { ">" }
                )
            }
        }
    }
}

/// Segments `vol` by `rule`; `crop` is the box `vol` was cut to, if any, for the messages.
pub fn segment(vol: &Volume, rule: &Segmentation, crop: Option<&Crop>) -> Result<PoreMask> {
    let pore = match rule {
        Segmentation::Labels(labels) => {
            if labels.is_empty() {
                return Err(Error::Usage("give at least one pore label".into()));
            }
            check_labels_present(&vol.data, labels, crop)?;
            by_labels(&vol.data, labels)
        }
        Segmentation::Threshold { t, pore_below } => {
            if !t.is_finite() {
                return Err(Error::Usage(format!("threshold must be finite, got {t}")));
            }
            by_threshold(&vol.data, *t, *pore_below)
        }
    };
    Ok(PoreMask::new(vol.shape, pore))
}

fn by_labels(data: &VoxelData, labels: &[u32]) -> Vec<bool> {
    match data {
        VoxelData::U8(v) => {
            let table = lookup_table(256, labels);
            v.iter().map(|&x| table[usize::from(x)]).collect()
        }
        VoxelData::U16(v) => {
            let table = lookup_table(65536, labels);
            v.iter().map(|&x| table[usize::from(x)]).collect()
        }
        VoxelData::F32(v) => {
            let labels: Vec<f64> = labels.iter().map(|&l| f64::from(l)).collect();
            v.iter().map(|&x| labels.contains(&f64::from(x))).collect()
        }
    }
}

fn lookup_table(len: usize, labels: &[u32]) -> Vec<bool> {
    let mut table = vec![false; len];
    for &l in labels {
        if let Some(slot) = usize::try_from(l).ok().and_then(|i| table.get_mut(i)) {
            *slot = true;
        }
    }
    table
}

fn by_threshold(data: &VoxelData, t: f64, pore_below: bool) -> Vec<bool> {
    // NaN compares false both ways, so NaN voxels end up solid as documented.
    let test = |x: f64| if pore_below { x < t } else { x > t };
    match data {
        VoxelData::U8(v) => v.iter().map(|&x| test(f64::from(x))).collect(),
        VoxelData::U16(v) => v.iter().map(|&x| test(f64::from(x))).collect(),
        VoxelData::F32(v) => v.iter().map(|&x| test(f64::from(x))).collect(),
    }
}

/// How many distinct values an "unknown label" message lists.
const LIST_MAX: usize = 10;

/// Fails naming the first label that never occurs, with the values that do.
fn check_labels_present(data: &VoxelData, labels: &[u32], crop: Option<&Crop>) -> Result<()> {
    let seen = seen_table(data);
    let occurs = |label: u32| match (&seen, data) {
        (Some(seen), _) => usize::try_from(label)
            .ok()
            .and_then(|i| seen.get(i).copied())
            .unwrap_or(false),
        (None, VoxelData::F32(v)) => {
            let l = f64::from(label);
            v.iter().any(|&x| f64::from(x) == l)
        }
        (None, _) => false,
    };
    let Some(&missing) = labels.iter().find(|&&l| !occurs(l)) else {
        return Ok(());
    };
    let (listing, all_integer, wild) = match &seen {
        Some(seen) => (list_seen(seen), true, false),
        None => list_floats(data),
    };
    let uniform = seen
        .as_ref()
        .is_some_and(|seen| seen.iter().filter(|&&b| b).count() == 1);
    let (region, whole) = match crop {
        Some(c) => (format!("the crop {c}"), "the crop is"),
        None => ("the volume".to_string(), "the image is"),
    };
    let hint = if wild {
        "; such values suggest the data are not 32-bit floats: for a raw file check --raw-type and --raw-endian".to_string()
    } else if uniform {
        format!("; that one value only, so {whole} all solid for this label (or not segmented)")
    } else if all_integer {
        let distinct = seen
            .as_ref()
            .map_or(0, |s| s.iter().filter(|&&b| b).count());
        if distinct > LIST_MAX {
            "; so many values look like an unsegmented grey image: segment it with --threshold VALUE --pore below|above".to_string()
        } else {
            String::new()
        }
    } else {
        "; this float image may need a threshold instead of labels".to_string()
    };
    Err(Error::Usage(format!(
        "unknown pore label {missing}: it does not occur in {region}; values present: {listing}{hint}"
    )))
}

/// Which values occur, for the integer sample types (index = value).
fn seen_table(data: &VoxelData) -> Option<Vec<bool>> {
    match data {
        VoxelData::U8(v) => {
            let mut seen = vec![false; 256];
            v.iter().for_each(|&x| seen[usize::from(x)] = true);
            Some(seen)
        }
        VoxelData::U16(v) => {
            let mut seen = vec![false; 65536];
            v.iter().for_each(|&x| seen[usize::from(x)] = true);
            Some(seen)
        }
        VoxelData::F32(_) => None,
    }
}

/// "0, 1, 2" or "1, 2, … (40 distinct values)".
fn list_seen(seen: &[bool]) -> String {
    let present: Vec<usize> = (0..seen.len()).filter(|&i| seen[i]).collect();
    let mut s = join(present.iter().take(LIST_MAX));
    if present.len() > LIST_MAX {
        s.push_str(&format!(" … ({} distinct values)", present.len()));
    }
    s
}

/// The smallest distinct non-NaN values of a float volume as a listing, whether all are whole
/// numbers, and whether some are wild (infinite, beyond ±1e30 or tinier than 1e-30 but not
/// zero): what bytes of another type read as f32 look like.
fn list_floats(data: &VoxelData) -> (String, bool, bool) {
    let VoxelData::F32(v) = data else {
        return (String::new(), true, false);
    };
    // Keep the smallest LIST_MAX + 1 distinct values: one extra tells that there are more.
    let mut first: Vec<f32> = Vec::new();
    let mut all_integer = true;
    let mut wild = false;
    for &x in v.iter().filter(|x| !x.is_nan()) {
        all_integer &= x.fract() == 0.0;
        wild |= x.abs() > 1e30 || (x != 0.0 && x.abs() < 1e-30);
        if let Err(i) = first.binary_search_by(|p| p.total_cmp(&x))
            && i <= LIST_MAX
        {
            first.insert(i, x);
            first.truncate(LIST_MAX + 1);
        }
    }
    if first.is_empty() {
        return ("none (every voxel is NaN)".into(), all_integer, true);
    }
    let short = |x: &f32| {
        if x.abs() >= 1e7 || (*x != 0.0 && x.abs() < 1e-4) {
            format!("{x:e}")
        } else {
            x.to_string()
        }
    };
    let mut s = join(first.iter().take(LIST_MAX).map(short));
    if first.len() > LIST_MAX {
        s.push_str(" …");
    }
    (s, all_integer, wild)
}

fn join<T: fmt::Display>(items: impl Iterator<Item = T>) -> String {
    items.map(|x| x.to_string()).collect::<Vec<_>>().join(", ")
}

#[cfg(test)]
mod tests {
    use super::*;

    fn vol(data: VoxelData) -> Volume {
        Volume::new([data.len(), 1, 1], data).unwrap()
    }

    #[test]
    fn labels_select_pore() {
        let v = vol(VoxelData::U8(vec![0, 1, 2, 0, 3]));
        let m = segment(&v, &Segmentation::default(), None).unwrap();
        assert_eq!(m.as_slice(), &[true, false, false, true, false]);
        let m = segment(&v, &Segmentation::parse_labels("1, 3").unwrap(), None).unwrap();
        assert_eq!(m.as_slice(), &[false, true, false, false, true]);
    }

    #[test]
    fn unknown_label_lists_present_values() {
        let v = vol(VoxelData::U16(vec![1, 2, 2, 300]));
        let Err(Error::Usage(msg)) = segment(&v, &Segmentation::default(), None) else {
            panic!("expected a usage error");
        };
        assert!(msg.contains("unknown pore label 0"), "{msg}");
        assert!(msg.contains("1, 2, 300"), "{msg}");
        assert!(!msg.contains("all solid"), "{msg}");
        // One value only: said to be all solid for the label.
        let v = vol(VoxelData::U8(vec![255, 255, 255, 255]));
        let Err(Error::Usage(msg)) = segment(&v, &Segmentation::default(), None) else {
            panic!("expected a usage error");
        };
        assert!(
            msg.contains("values present: 255") && msg.contains("all solid"),
            "{msg}"
        );
        // Cut to a crop: the message names the crop, not the volume.
        let crop = Crop {
            ranges: [0..2, 0..1, 0..1],
        };
        let Err(Error::Usage(msg)) = segment(&v, &Segmentation::default(), Some(&crop)) else {
            panic!("expected a usage error");
        };
        assert!(
            msg.contains("does not occur in the crop 0:2,0:1,0:1")
                && msg.contains("the crop is all solid")
                && !msg.contains("volume"),
            "{msg}"
        );
        // A label beyond the sample range can never occur.
        let v = vol(VoxelData::U8(vec![0, 1]));
        assert!(segment(&v, &Segmentation::Labels(vec![256]), None).is_err());
    }

    #[test]
    fn long_listing_is_truncated() {
        let v = vol(VoxelData::U8((1..=40).collect()));
        let Err(Error::Usage(msg)) = segment(&v, &Segmentation::default(), None) else {
            panic!()
        };
        assert!(
            msg.contains("1, 2, 3, 4, 5, 6, 7, 8, 9, 10 … (40 distinct values)"),
            "{msg}"
        );
        // So many values suggest a grey image, and the threshold is offered; a few do not.
        assert!(
            msg.contains("unsegmented grey image: segment it with --threshold"),
            "{msg}"
        );
        let v = vol(VoxelData::U8((1..=5).collect()));
        let Err(Error::Usage(msg)) = segment(&v, &Segmentation::default(), None) else {
            panic!()
        };
        assert!(!msg.contains("--threshold"), "{msg}");
    }

    #[test]
    fn float_labels_and_listing() {
        let v = vol(VoxelData::F32(vec![0.0, 1.0, 1.0, f32::NAN]));
        let m = segment(&v, &Segmentation::Labels(vec![1]), None).unwrap();
        assert_eq!(m.as_slice(), &[false, true, true, false]);
        let v = vol(VoxelData::F32((0..50).map(|i| i as f32 * 0.5).collect()));
        // 24.0 is the 49th value, beyond the listed ones, so it must still be found.
        assert!(segment(&v, &Segmentation::Labels(vec![24]), None).is_ok());
        let Err(Error::Usage(msg)) = segment(&v, &Segmentation::Labels(vec![7, 99]), None) else {
            panic!()
        };
        assert!(msg.contains("label 99"), "{msg}");
        assert!(msg.contains("0, 0.5, 1, 1.5"), "{msg}");
        assert!(msg.contains("threshold"), "{msg}");
        // Bytes of another type read as f32: compact numbers and a hint at the raw layout.
        let v = vol(VoxelData::F32(vec![
            f32::from_le_bytes([0, 1, 255, 254]),
            f32::from_le_bytes([1, 0, 0, 0]),
        ]));
        let Err(Error::Usage(msg)) = segment(&v, &Segmentation::Labels(vec![0]), None) else {
            panic!()
        };
        assert!(msg.contains("e38") && msg.contains("e-45"), "{msg}");
        assert!(msg.contains("--raw-type and --raw-endian"), "{msg}");
    }

    #[test]
    fn threshold_is_strict_and_nan_is_solid() {
        let v = vol(VoxelData::F32(vec![0.5, 1.0, 1.5, f32::NAN]));
        let below = Segmentation::Threshold {
            t: 1.0,
            pore_below: true,
        };
        let above = Segmentation::Threshold {
            t: 1.0,
            pore_below: false,
        };
        assert_eq!(
            segment(&v, &below, None).unwrap().as_slice(),
            &[true, false, false, false]
        );
        assert_eq!(
            segment(&v, &above, None).unwrap().as_slice(),
            &[false, false, true, false]
        );
        let v = vol(VoxelData::U16(vec![10, 200, 60000]));
        let m = segment(
            &v,
            &Segmentation::Threshold {
                t: 100.0,
                pore_below: false,
            },
            None,
        )
        .unwrap();
        assert_eq!(m.as_slice(), &[false, true, true]);
        let bad = Segmentation::Threshold {
            t: f64::NAN,
            pore_below: true,
        };
        assert!(matches!(segment(&v, &bad, None), Err(Error::Usage(_))));
    }
}
