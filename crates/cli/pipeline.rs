//! The scoring pipeline: message -> features -> `p_junk`, and learning from a label.
//!
//! Joins the text crate's extractor to the model and owns the reusable
//! feature buffer, so that scoring and learning allocate nothing per message
//! once warm. Model files (weights with their hash key and feature settings)
//! are read and written by `chaffgate_server::model_file`.

use std::path::Path;

use anyhow::Context;
use chaffgate_model::{Model, UpdateRule};
use chaffgate_server::judge::{Reason, name_contributions};
use chaffgate_server::model_file::{load_model_file, save_model_file};
use chaffgate_text::{Extractor, FeatureSettings, Features, HashKey, Message};

pub struct Pipeline {
    extractor: Extractor,
    model: Model,
    key: HashKey,
    features: Features,
    last_seq: u64,
}

impl Pipeline {
    /// An empty model: every message scores `p_junk = 0.5` until it learns.
    pub fn new(settings: FeatureSettings, rule: UpdateRule, key: HashKey) -> anyhow::Result<Self> {
        let model = Model::new(settings.bits, rule).context("creating the model")?;
        Ok(Pipeline {
            extractor: Extractor::new(settings, key.clone()),
            model,
            key,
            features: Features::default(),
            last_seq: 0,
        })
    }

    pub fn model(&self) -> &Model {
        &self.model
    }

    pub fn settings(&self) -> &FeatureSettings {
        self.extractor.settings()
    }

    /// `p_junk` of one message under the current weights.
    pub fn score(&mut self, message: &Message) -> f64 {
        self.extractor.extract(message, &mut self.features);
        self.model.predict(self.features.as_slice())
    }

    /// Learns from one labelled message; returns `p_junk` as it was before
    /// the update (what progressive validation records).
    pub fn learn(&mut self, message: &Message, is_junk: bool) -> f64 {
        self.extractor.extract(message, &mut self.features);
        self.model.learn(self.features.as_slice(), is_junk)
    }

    /// The `limit` features that pushed this message's `p_junk` most, by
    /// readable name. Names that share one hashed slot are joined with ` | `.
    pub fn reasons(&mut self, message: &Message, limit: usize) -> Vec<Reason> {
        self.extractor.extract(message, &mut self.features);
        let top = self.model.explain(self.features.as_slice(), limit);
        name_contributions(&mut self.extractor, message, &top)
    }

    /// Writes the model with its hash key and feature settings.
    pub fn save(&self, path: &Path) -> anyhow::Result<()> {
        let last_seq = i64::try_from(self.last_seq).unwrap_or(i64::MAX);
        save_model_file(
            path,
            &self.model,
            self.extractor.settings(),
            &self.key,
            last_seq,
        )
        .with_context(|| format!("writing model {}", path.display()))
    }

    /// Reads a model written by [`Pipeline::save`].
    pub fn open(path: &Path) -> anyhow::Result<Self> {
        let loaded = load_model_file(path)?;
        let last_seq = u64::try_from(loaded.last_seq).unwrap_or(0);
        Ok(Pipeline {
            extractor: Extractor::new(loaded.settings, loaded.key.clone()),
            model: loaded.model,
            key: loaded.key,
            features: Features::default(),
            last_seq,
        })
    }
}
