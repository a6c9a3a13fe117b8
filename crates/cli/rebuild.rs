//! `chaffgate rebuild`: a fresh model from the whole feedback log.
//!
//! The feedback log is the source of truth. Rebuild takes the hash key,
//! feature settings and update rule from the newest valid checkpoint,
//! starts from an all-zero model and applies every live feedback row in
//! sequence order with the learner's own code, so the result must equal
//! the live model bit for bit when both include the same rows. It compares
//! itself with the newest checkpoint and says whether they are identical.

use std::path::PathBuf;

use anyhow::{Context, bail};
use chaffgate_model::Model;
use chaffgate_server::learner::{examples_from_rows, learn_examples};
use chaffgate_server::model_file::{LoadedModel, load_model_file, save_model_file};
use chaffgate_store::{FeedbackSeq, Store};
use chaffgate_text::Extractor;

use crate::config::Config;
use crate::serve::{CHECKPOINT_DIR, DATABASE_FILE};

pub struct RebuildOptions {
    /// Where to write the rebuilt model.
    pub out: PathBuf,
}

pub async fn run(config: &Config, options: RebuildOptions) -> anyhow::Result<()> {
    let data_dir = &config.server.data_dir;
    let database = data_dir.join(DATABASE_FILE);
    if !database.is_file() {
        bail!(
            "no database at {}: run `chaffgate serve` first (or set server.data_dir)",
            database.display()
        );
    }
    let store = Store::open(&database)
        .await
        .with_context(|| format!("opening database {}", database.display()))?;
    let (newest_name, newest) = newest_checkpoint(&store, data_dir).await?;
    let LoadedModel {
        model: live,
        settings,
        key,
        last_seq: live_seq,
    } = newest;

    let mut model = Model::new(live.bits(), live.rule()).context("creating a fresh model")?;
    let mut extractor = Extractor::new(settings.clone(), key.clone());
    let mut after = FeedbackSeq::ZERO;
    let mut rows_applied: u64 = 0;
    loop {
        let rows = store.feedback_after(after, 1000).await?;
        let Some(last) = rows.last() else {
            break;
        };
        after = last.seq;
        learn_examples(&mut model, &examples_from_rows(&mut extractor, &rows));
        rows_applied += rows.len() as u64;
    }
    store.close().await;
    save_model_file(&options.out, &model, &settings, &key, after.0)
        .with_context(|| format!("writing model {}", options.out.display()))?;
    let seq = after.0;
    let out = options.out.display();
    println!("rebuilt from {rows_applied} feedback rows (up to seq {seq}); written to {out}");
    if live_seq == seq {
        if model == live {
            println!("identical to checkpoint {newest_name} (seq {live_seq}), bit for bit");
        } else {
            bail!(
                "the rebuilt model DIFFERS from checkpoint {newest_name} at the same seq {seq}: \
                 the checkpoint did not come from this log alone (a rollback?) or a bug broke determinism"
            );
        }
    } else {
        println!(
            "the newest checkpoint {newest_name} includes rows up to seq {live_seq}, so it is not comparable"
        );
    }
    Ok(())
}

async fn newest_checkpoint(
    store: &Store,
    data_dir: &std::path::Path,
) -> anyhow::Result<(String, LoadedModel)> {
    for row in store.list_checkpoints().await? {
        let path = data_dir.join(CHECKPOINT_DIR).join(&row.file_name);
        match load_model_file(&path) {
            Ok(loaded) => return Ok((row.file_name, loaded)),
            Err(err) => eprintln!("skipping unusable checkpoint {}: {err}", path.display()),
        }
    }
    bail!(
        "no usable checkpoint in {}: the hash key and settings come from one",
        data_dir.join(CHECKPOINT_DIR).display()
    )
}
