//! What makes a batch resumable: the settings of one sample as canonical JSON, and the
//! `batch_key` recorded in its result file — SHA-256 over the input's content hash and those
//! settings. A rerun skips a sample whose result file carries the key it would write now.
//!
//! The key leaves out what cannot change the answer (file path, thread count, memory limit)
//! and the voxperm version (delete the results folder to redo a batch after an upgrade).

use super::result::ResultView;
use crate::analysis::run::RunConfig;
use crate::volume::sample::SampleSpec;
use serde_json::{Value, json};
use sha2::{Digest, Sha256};
use std::path::Path;

/// The settings of one sample that determine its result.
pub fn sample_settings(spec: &SampleSpec, cfg: &RunConfig) -> Value {
    json!({
        "segmentation": spec.segmentation.to_string(),
        "crop": spec.crop.as_ref().map(ToString::to_string),
        "voxel_size_m": spec.voxel_size_m,
        "raw": spec.raw.map(|r| json!({
            "shape": r.shape,
            "type": r.kind.to_string(),
            "endian": r.endian.to_string(),
        })),
        "axes": cfg.axes,
        "boundary": cfg.mode,
        "solver": cfg.solver,
        "flow_snapshot": cfg.flow_snapshot,
    })
}

/// JSON text with object keys sorted at every level and no whitespace, so equal settings give
/// equal text whatever order the fields were built in.
pub fn canonical_json(v: &Value) -> String {
    match v {
        Value::Object(m) => {
            let mut keys: Vec<&String> = m.keys().collect();
            keys.sort();
            let items: Vec<String> = keys
                .into_iter()
                .map(|k| format!("{}:{}", Value::String(k.clone()), canonical_json(&m[k])))
                .collect();
            format!("{{{}}}", items.join(","))
        }
        Value::Array(a) => {
            let items: Vec<String> = a.iter().map(canonical_json).collect();
            format!("[{}]", items.join(","))
        }
        other => other.to_string(),
    }
}

/// The resume key: SHA-256 over a format tag, the voxperm version, the input's content hash and
/// the canonical settings, hex-encoded. The version is in it because a new version may give a
/// different answer for the same settings (e.g. a changed default start), and one results folder
/// should not mix versions silently.
pub fn batch_key(input_sha256: &str, settings: &Value) -> String {
    let mut h = Sha256::new();
    h.update(b"voxperm batch key 2\n");
    h.update(crate::VERSION.as_bytes());
    h.update(b"\n");
    h.update(input_sha256.as_bytes());
    h.update(b"\n");
    h.update(canonical_json(settings).as_bytes());
    hex::encode(h.finalize())
}

/// The earlier result at `path` if it exists, parses and carries `key`.
pub fn unchanged_result(path: &Path, key: &str) -> Option<ResultView> {
    let view = ResultView::read(path).ok()?;
    (view.batch_key.as_deref() == Some(key)).then_some(view)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn canonical_json_ignores_key_order() {
        let a: Value = serde_json::from_str(r#"{"b":1,"a":{"d":[1,2],"c":null}}"#).unwrap();
        let b: Value = serde_json::from_str(r#"{"a":{"c":null,"d":[1,2]},"b":1}"#).unwrap();
        assert_eq!(canonical_json(&a), canonical_json(&b));
        assert_eq!(canonical_json(&a), r#"{"a":{"c":null,"d":[1,2]},"b":1}"#);
    }

    #[test]
    fn key_changes_with_input_and_settings() {
        let s1 = json!({"tau": 1.0});
        let s2 = json!({"tau": 0.9});
        let k = batch_key("abc", &s1);
        assert_eq!(k.len(), 64);
        assert_eq!(k, batch_key("abc", &s1));
        assert_ne!(k, batch_key("abd", &s1));
        assert_ne!(k, batch_key("abc", &s2));
    }
}
