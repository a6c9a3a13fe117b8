//! Model files: the weights plus the hash key and feature settings that
//! give them meaning.
//!
//! A model is useless without the key that decided where each weight lives
//! and the settings that decide which features exist, so both travel in the
//! checkpoint header (the settings as JSON in its `extractor` field). Loading
//! checks that the three belong together.

use std::path::{Path, PathBuf};

use chaffgate_model::{
    CheckpointError, CheckpointHeader, Model, read_checkpoint, write_checkpoint,
};
use chaffgate_text::{FeatureSettings, HashKey};

/// A model file's contents, checked for consistency.
pub struct LoadedModel {
    pub model: Model,
    pub settings: FeatureSettings,
    pub key: HashKey,
    /// The last feedback sequence number the saved model includes.
    pub last_seq: i64,
}

#[derive(Debug, thiserror::Error)]
pub enum ModelFileError {
    /// The checkpoint itself could not be read or written (the error names
    /// the path).
    #[error(transparent)]
    Checkpoint(#[from] CheckpointError),
    /// The header's feature settings are not valid JSON settings, or
    /// out of range.
    #[error("model {path}: invalid feature settings: {problem}")]
    Settings { path: PathBuf, problem: String },
    /// The header and the weights disagree.
    #[error("model {path} is inconsistent: {what}")]
    Inconsistent { path: PathBuf, what: String },
}

/// Feature kinds added after the first model files were written. A file
/// that does not name one was trained without it, so it stays off: turning
/// it on would add features its weights never saw.
const LATER_FEATURE_SWITCHES: [&str; 4] = [
    "skeletons",
    "joined_letters",
    "digit_letters",
    "mixed_script",
];

/// The feature settings recorded in a model file.
fn settings_from_json(text: &str) -> Result<FeatureSettings, serde_json::Error> {
    let mut value: serde_json::Value = serde_json::from_str(text)?;
    if let Some(fields) = value.as_object_mut() {
        for switch in LATER_FEATURE_SWITCHES {
            fields
                .entry(switch)
                .or_insert(serde_json::Value::Bool(false));
        }
    }
    serde_json::from_value(value)
}

/// Reads a checkpoint and checks that its settings and key belong to its
/// weights.
pub fn load_model_file(path: &Path) -> Result<LoadedModel, ModelFileError> {
    let (model, header) = read_checkpoint(path)?;
    let settings =
        settings_from_json(&header.extractor).map_err(|err| ModelFileError::Settings {
            path: path.to_owned(),
            problem: err.to_string(),
        })?;
    if let Err(problems) = settings.validate() {
        let list: Vec<String> = problems.iter().map(|p| p.to_string()).collect();
        return Err(ModelFileError::Settings {
            path: path.to_owned(),
            problem: list.join("; "),
        });
    }
    if settings.bits != model.bits() {
        let (features, weights) = (settings.bits, model.bits());
        return Err(ModelFileError::Inconsistent {
            path: path.to_owned(),
            what: format!("features use {features} bits, weights {weights}"),
        });
    }
    let key = HashKey::from_bytes(header.hash_key);
    if key.key_id() != header.key_id {
        return Err(ModelFileError::Inconsistent {
            path: path.to_owned(),
            what: "its hash key does not match its key id".to_owned(),
        });
    }
    Ok(LoadedModel {
        model,
        settings,
        key,
        last_seq: i64::try_from(header.last_seq).unwrap_or(i64::MAX),
    })
}

/// Writes a checkpoint (atomically) with the key and settings beside the
/// weights.
pub fn save_model_file(
    path: &Path,
    model: &Model,
    settings: &FeatureSettings,
    key: &HashKey,
    last_seq: i64,
) -> Result<(), ModelFileError> {
    let extractor = serde_json::to_string(settings).map_err(|err| ModelFileError::Settings {
        path: path.to_owned(),
        problem: err.to_string(),
    })?;
    let header = CheckpointHeader {
        key_id: key.key_id(),
        hash_key: *key.as_bytes(),
        last_seq: u64::try_from(last_seq).unwrap_or(0),
        extractor,
    };
    write_checkpoint(path, model, &header)?;
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;
    use chaffgate_model::UpdateRule;

    #[test]
    fn saved_model_loads_with_its_key_and_settings() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("m.cgm");
        let settings = FeatureSettings {
            bits: 12,
            ..FeatureSettings::default()
        };
        let rule = UpdateRule::Ftrl {
            alpha: 0.5,
            beta: 0.01,
            l1: 0.0,
            l2: 0.0,
        };
        let mut model = Model::new(12, rule).unwrap();
        model.learn(&[(3, 1.0)], true);
        let key = HashKey::from_bytes([9; 16]);
        save_model_file(&path, &model, &settings, &key, 42).unwrap();
        let loaded = load_model_file(&path).unwrap();
        assert!(loaded.model == model);
        assert_eq!(loaded.settings, settings);
        assert_eq!(loaded.key.key_id(), key.key_id());
        assert_eq!(loaded.last_seq, 42);
    }

    #[test]
    fn files_from_before_the_respelling_features_keep_them_off() {
        let mut old = serde_json::to_value(FeatureSettings::default()).unwrap();
        for switch in LATER_FEATURE_SWITCHES {
            assert!(old.as_object_mut().unwrap().remove(switch).is_some());
        }
        let settings = settings_from_json(&old.to_string()).unwrap();
        assert!(!settings.skeletons && !settings.joined_letters);
        assert!(!settings.digit_letters && !settings.mixed_script);
        // A file that names them keeps what it says.
        let now = serde_json::to_string(&FeatureSettings::default()).unwrap();
        assert_eq!(
            settings_from_json(&now).unwrap(),
            FeatureSettings::default()
        );
    }
}
