//! What a batch will run: from a manifest (TOML) or a folder to a list of named samples, each
//! with its own input, axis and boundary settings, all checked before the first solve.
//!
//! Manifest format (docs/batch-manifest.md has the full description and an example):
//!
//! ```toml
//! [defaults]                  # optional; applies to every sample
//! voxel_size = "2.5um"
//! ends = "mirror"
//!
//! [[sample]]                  # one table per sample
//! path = "scans/core-a.tif"   # relative to the manifest's folder
//! name = "core-a"             # optional; default: the file or folder name without extension
//! crop = ":,:,10:90"
//!
//! [[sample]]
//! path = "raw/foam.raw"
//! raw_shape = "200x200x150"
//! raw_type = "u16"
//! threshold = 12000
//! pore = "below"
//! ```
//!
//! Keys are the `estimate` options with `_` for `-`: `voxel_size`, `pore_label` (a number or a
//! list), `threshold` + `pore`, `crop`, `raw_shape`, `raw_type`, `raw_endian`, `axis`, `sides`,
//! `ends`, `periodic`. Precedence: a sample's own keys, then `[defaults]`, then the command
//! line, then the built-in defaults. Unknown keys are errors naming the key and the sample.

use super::args::{BoundaryArgs, InputArgs, parse_axes};
use serde::Deserialize;
use std::collections::HashSet;
use std::path::{Path, PathBuf};
use voxperm::geometry::Axis;
use voxperm::lbm::{BoundaryMode, Ends, Sides};
use voxperm::volume::sample::SampleSpec;
use voxperm::volume::{natural_cmp, slice_files};
use voxperm::{Error, Result};

/// One sample of a batch, ready to run.
#[derive(Debug, Clone)]
pub struct Planned {
    pub name: String,
    pub spec: SampleSpec,
    pub axes: Vec<Axis>,
    pub mode: BoundaryMode,
}

/// Settings as they accumulate from the command line through `[defaults]` to a sample.
#[derive(Clone)]
struct Layered {
    input: InputArgs,
    axis: String,
    mode: BoundaryMode,
}

/// `pore_label = 0` or `pore_label = [0, 3]`.
#[derive(Debug, Clone, Deserialize)]
#[serde(try_from = "toml::Value")]
enum Labels {
    One(u32),
    Many(Vec<u32>),
}

impl TryFrom<toml::Value> for Labels {
    type Error = String;

    fn try_from(v: toml::Value) -> std::result::Result<Labels, String> {
        let bad = || {
            format!(
                "pore_label must be a whole number from 0 to {} or a list of them (e.g. 0 or [0, 3]), not {v}",
                u32::MAX
            )
        };
        let one = |x: &toml::Value| x.as_integer().and_then(|i| u32::try_from(i).ok());
        match &v {
            toml::Value::Array(items) if !items.is_empty() => items
                .iter()
                .map(|x| one(x).ok_or_else(bad))
                .collect::<std::result::Result<Vec<_>, _>>()
                .map(Labels::Many),
            other => one(other).map(Labels::One).ok_or_else(bad),
        }
    }
}

/// The keys of a `[[sample]]` or `[defaults]` table.
#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
struct Entry {
    path: Option<PathBuf>,
    name: Option<String>,
    voxel_size: Option<String>,
    pore_label: Option<Labels>,
    threshold: Option<f64>,
    pore: Option<String>,
    crop: Option<String>,
    raw_shape: Option<String>,
    raw_type: Option<String>,
    raw_endian: Option<String>,
    axis: Option<String>,
    sides: Option<String>,
    ends: Option<String>,
    periodic: Option<bool>,
}

impl Entry {
    /// Lays this table's keys over `st`.
    fn apply(&self, st: &mut Layered) -> Result<()> {
        let usage = |m: &str| Err(Error::Usage(m.to_string()));
        if self.pore_label.is_some() && self.threshold.is_some() {
            return usage(
                "pore_label and threshold exclude each other: choose labels or a threshold",
            );
        }
        if self.periodic == Some(true) && (self.sides.is_some() || self.ends.is_some()) {
            return usage("periodic = true already sets sides and ends: drop one");
        }
        let i = &mut st.input;
        if let Some(l) = &self.pore_label {
            i.pore_label = match l {
                Labels::One(n) => vec![*n],
                Labels::Many(v) => v.clone(),
            };
            i.threshold = None;
            i.pore = None;
        }
        if let Some(t) = self.threshold {
            i.threshold = Some(t);
            i.pore_label.clear();
        }
        let set = |slot: &mut Option<String>, v: &Option<String>| {
            if v.is_some() {
                slot.clone_from(v);
            }
        };
        set(&mut i.pore, &self.pore);
        // "file": the file's own voxel size again, under a default set further out.
        match self.voxel_size.as_deref() {
            Some(v) if v.trim().eq_ignore_ascii_case("file") => i.voxel_size = None,
            _ => set(&mut i.voxel_size, &self.voxel_size),
        }
        set(&mut i.crop, &self.crop);
        set(&mut i.raw_shape, &self.raw_shape);
        set(&mut i.raw_type, &self.raw_type);
        set(&mut i.raw_endian, &self.raw_endian);
        if let Some(a) = &self.axis {
            st.axis.clone_from(a);
        }
        // false: back to the scan default (sealed sides, mirrored ends) under a periodic
        // default set further out; sides and ends below still refine it.
        match self.periodic {
            Some(true) => st.mode = BoundaryMode::PERIODIC,
            Some(false) => st.mode = BoundaryMode::SCAN,
            None => {}
        }
        if let Some(s) = &self.sides {
            st.mode.sides = s
                .parse::<Sides>()
                .map_err(|e| Error::Usage(format!("sides: {e}")))?;
        }
        if let Some(e) = &self.ends {
            st.mode.ends = e
                .parse::<Ends>()
                .map_err(|e| Error::Usage(format!("ends: {e}")))?;
        }
        Ok(())
    }
}

impl Layered {
    /// The command line's settings, the outermost layer.
    fn from_cli(input: &InputArgs, axis: &str, boundary: &BoundaryArgs) -> Result<Layered> {
        Ok(Layered {
            input: input.clone(),
            axis: axis.to_string(),
            mode: boundary.mode(BoundaryMode::SCAN)?,
        })
    }

    /// Checks the accumulated settings and builds the sample.
    fn plan(&self, name: String, path: PathBuf) -> Result<Planned> {
        let i = &self.input;
        if i.pore.is_some() && i.threshold.is_none() {
            return Err(Error::Usage("pore (below|above) needs a threshold".into()));
        }
        if i.raw_shape.is_none() && (i.raw_type.is_some() || i.raw_endian.is_some()) {
            return Err(Error::Usage(
                "raw_type and raw_endian need raw_shape".into(),
            ));
        }
        let p = i.plan()?;
        Ok(Planned {
            name,
            spec: SampleSpec {
                path,
                raw: p.raw,
                segmentation: p.segmentation,
                crop: p.crop,
                voxel_size_m: p.voxel_size_m,
                default_segmentation: p.default_segmentation,
            },
            axes: parse_axes(&self.axis)?,
            mode: self.mode,
        })
    }
}

/// Reads a manifest and plans every sample; any problem is an error before anything runs.
pub fn from_manifest(
    manifest: &Path,
    input: &InputArgs,
    axis: &str,
    boundary: &BoundaryArgs,
) -> Result<Vec<Planned>> {
    if !manifest.exists() {
        return Err(Error::bad_input(manifest, "no such file or folder"));
    }
    if manifest.extension().and_then(|e| e.to_str()) != Some("toml") {
        return Err(Error::Usage(format!(
            "{}: a batch needs a folder of samples or a .toml manifest (for one sample use voxperm estimate)",
            manifest.display()
        )));
    }
    // A manifest is a few kilobytes; the same cap as for result files keeps a wrong file out.
    let text = voxperm::report::result::read_small(manifest, "batch manifest")?;
    let bad = |m: String| Error::Usage(format!("{}: {m}", manifest.display()));
    let mut table: toml::Table = toml::from_str(&text).map_err(|e| {
        let msg = e.message().to_string();
        let line = e
            .span()
            .map(|s| format!(" (line {})", text[..s.start].lines().count().max(1)))
            .unwrap_or_default();
        Error::bad_input(manifest, format!("not valid TOML{line}: {msg}"))
    })?;
    let defaults: Entry = match table.remove("defaults") {
        Some(v) => v
            .try_into()
            .map_err(|e: toml::de::Error| bad(format!("[defaults]: {}", e.message())))?,
        None => Entry::default(),
    };
    if defaults.path.is_some() || defaults.name.is_some() {
        return Err(bad(
            "[defaults]: path and name belong to a [[sample]]".into()
        ));
    }
    let samples = match table.remove("sample") {
        Some(toml::Value::Array(a)) => a,
        Some(_) => {
            return Err(bad(
                "'sample' must be an array of tables: write [[sample]]".into()
            ));
        }
        None => return Err(bad("no [[sample]] tables: nothing to run".into())),
    };
    if let Some(key) = table.keys().next() {
        return Err(bad(format!(
            "unknown top-level key '{key}' (expected [defaults] and [[sample]])"
        )));
    }
    let base = manifest.parent().unwrap_or(Path::new(""));
    let mut outer = Layered::from_cli(input, axis, boundary)?;
    defaults
        .apply(&mut outer)
        .map_err(|e| bad(format!("[defaults]: {e}")))?;
    let mut planned = Vec::new();
    for (n, v) in samples.into_iter().enumerate() {
        let who = |e: &dyn std::fmt::Display, label: &str| {
            bad(format!("sample {} ({label}): {e}", n + 1))
        };
        // The name for messages comes from the raw table: a bad key fails the typed parse.
        let label = v
            .get("name")
            .or_else(|| v.get("path"))
            .and_then(toml::Value::as_str)
            .unwrap_or("unnamed")
            .to_string();
        let entry: Entry = v
            .try_into()
            .map_err(|e: toml::de::Error| who(&e.message(), &label))?;
        let Some(path) = &entry.path else {
            return Err(who(&"no path", entry.name.as_deref().unwrap_or("unnamed")));
        };
        let path = base.join(path);
        let name = match &entry.name {
            Some(s) => s.clone(),
            None => default_name(&path),
        };
        let mut st = outer.clone();
        entry.apply(&mut st).map_err(|e| who(&e, &name))?;
        planned.push(
            st.plan(name.clone(), path)
                .map_err(|e| who(&as_manifest_keys(&e.to_string()), &name))?,
        );
    }
    check_names(&planned, manifest, true)?;
    Ok(planned)
}

/// A message about the sample options, in the manifest's words: `--pore belw` becomes
/// `pore (--pore) belw`, since the value may come from the manifest key or the command line.
fn as_manifest_keys(msg: &str) -> String {
    const OPTIONS: [&str; 8] = [
        "pore-label",
        "threshold",
        "pore",
        "voxel-size",
        "crop",
        "raw-shape",
        "raw-type",
        "raw-endian",
    ];
    let mut out = String::new();
    let mut rest = msg;
    while let Some(at) = rest.find("--") {
        out.push_str(&rest[..at]);
        let after = &rest[at + 2..];
        let len = after
            .find(|c: char| !(c.is_ascii_lowercase() || c == '-'))
            .unwrap_or(after.len());
        let opt = &after[..len];
        if OPTIONS.contains(&opt) {
            out.push_str(&format!("{} (--{opt})", opt.replace('-', "_")));
        } else {
            out.push_str(&rest[at..at + 2 + len]);
        }
        rest = &after[len..];
    }
    out.push_str(rest);
    out
}

/// Every TIFF stack, slice folder and (with `--raw-shape`) raw file directly in `folder`, in
/// natural name order, all with the command line's settings.
pub fn from_folder(
    folder: &Path,
    input: &InputArgs,
    axis: &str,
    boundary: &BoundaryArgs,
) -> Result<Vec<Planned>> {
    let io = |e: std::io::Error| Error::bad_input(folder, e.to_string());
    let raw = input.raw_shape.is_some();
    let mut paths = Vec::new();
    for entry in std::fs::read_dir(folder).map_err(io)? {
        let path = entry.map_err(io)?.path();
        let fname = path.file_name().map(|n| n.to_string_lossy().into_owned());
        if fname.as_deref().is_none_or(|n| n.starts_with('.')) {
            continue;
        }
        let ext = path
            .extension()
            .map(|e| e.to_string_lossy().to_ascii_lowercase());
        let wanted = if path.is_dir() {
            slice_files(&path).is_ok_and(|f| !f.is_empty())
        } else {
            match ext.as_deref() {
                Some("tif" | "tiff") => true,
                Some("raw") => raw,
                _ => false,
            }
        };
        if wanted {
            paths.push(path);
        }
    }
    let key = |p: &PathBuf| {
        p.file_name()
            .unwrap_or_default()
            .to_string_lossy()
            .into_owned()
    };
    paths.sort_by(|a, b| natural_cmp(&key(a), &key(b)));
    if paths.is_empty() {
        let what = if raw {
            "no TIFF stacks (.tif, .tiff), slice folders or .raw files"
        } else {
            "no TIFF stacks (.tif, .tiff) or slice folders (.raw files need --raw-shape)"
        };
        return Err(Error::bad_input(folder, format!("{what} to run")));
    }
    let is_raw =
        |p: &Path| p.is_file() && p.extension().is_some_and(|e| e.eq_ignore_ascii_case("raw"));
    if raw && !paths.iter().any(|p| is_raw(p)) {
        super::args::warn(format_args!(
            "{}: --raw-shape is given but the folder holds no .raw file, so it is not used (raw files must end in .raw)",
            folder.display()
        ));
    }
    let layer = Layered::from_cli(input, axis, boundary)?;
    let planned = paths
        .into_iter()
        .map(|p| {
            let raw_file = is_raw(&p);
            let mut planned = layer.plan(default_name(&p), p)?;
            // The raw layout describes the .raw files; stacks and slice folders carry their own.
            if !raw_file {
                planned.spec.raw = None;
            }
            Ok(planned)
        })
        .collect::<Result<Vec<_>>>()?;
    check_names(&planned, folder, false)?;
    Ok(planned)
}

/// A file's name without its extension, a folder's name as it is.
fn default_name(path: &Path) -> String {
    let n = if path.is_dir() {
        path.file_name()
    } else {
        path.file_stem()
    };
    n.map_or_else(|| "sample".into(), |s| s.to_string_lossy().into_owned())
}

/// Names become file names in the results folder: plain, unique, not the summary's.
fn check_names(planned: &[Planned], source: &Path, manifest: bool) -> Result<()> {
    let mut seen = HashSet::new();
    for p in planned {
        let n = &p.name;
        let plain = !n.is_empty()
            && !n.starts_with('.')
            && !n.contains(['/', '\\', ':'])
            && n.chars().all(|c| !c.is_control());
        // In a folder the names come from the file names; a manifest can set its own.
        let fix = if manifest {
            format!("set name = \"...\" for {}", p.spec.path.display())
        } else {
            format!(
                "rename {}, or list the samples in a manifest with name = \"...\"",
                p.spec.path.display()
            )
        };
        if !plain || n == "summary" {
            return Err(Error::Usage(format!(
                "{}: sample name '{n}' cannot be a result file name (no '/', '\\', ':', leading '.' or 'summary'); {fix}",
                source.display()
            )));
        }
        if !seen.insert(n.as_str()) {
            return Err(Error::Usage(format!(
                "{}: two samples are named '{n}'; {fix}",
                source.display()
            )));
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::as_manifest_keys;

    #[test]
    fn option_names_read_as_manifest_keys() {
        assert_eq!(
            as_manifest_keys("--pore belw: expected below or above"),
            "pore (--pore) belw: expected below or above"
        );
        assert_eq!(
            as_manifest_keys("--voxel-size 5: give a unit, and --pore-label 0"),
            "voxel_size (--voxel-size) 5: give a unit, and pore_label (--pore-label) 0"
        );
        // Options a manifest cannot set, and a lone "--", are left alone.
        assert_eq!(as_manifest_keys("--max-memory -- x"), "--max-memory -- x");
    }
}
