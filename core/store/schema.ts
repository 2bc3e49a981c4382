/**
 * The study file: one SQLite database (WAL) per study.
 *
 * Activation layout (designed for per-unit reads at 200k probes × 4096 units):
 *   one row per (layer, unit, chunk) holding that unit's float32 values for the chunk's probes, in probe order.
 *   A chunk is `run.chunk_size` consecutive probes (default 1024) and is the unit of commit: every layer's rows for
 *   a chunk are written in one transaction together with its `chunk_done` row, so a killed scan leaves whole chunks
 *   only. Reading one unit is N / chunk_size primary-key lookups (196 rows of 4 KiB at 200k probes), reading a
 *   layer for scoring is one unit at a time, so memory is bounded by one unit's N floats, never N × units.
 *   Conv and sequence units also keep, per probe, where the pooled value came from (argmax, uint32 blob).
 *
 * Annotations (core/review) are keyed by model fingerprint + probe-set fingerprint + layer name + unit, and are
 * never deleted when activations are discarded for a changed model or probe set.
 *
 * Migrations: PRAGMA user_version holds the schema version; `migrations[i]` takes version i to i+1.
 */
export const migrations: string[] = [
  // 0 → 1: the run, its layers, activations, labels and scores.
  `
  CREATE TABLE meta (key TEXT PRIMARY KEY, value TEXT NOT NULL);

  CREATE TABLE run (
    id INTEGER PRIMARY KEY CHECK (id = 1),
    model_path TEXT NOT NULL, model_fp TEXT NOT NULL, model_json TEXT NOT NULL,
    probes_dir TEXT NOT NULL, probes_fp TEXT NOT NULL, probes_name TEXT NOT NULL,
    probe_count INTEGER NOT NULL, chunk_size INTEGER NOT NULL,
    created_at TEXT NOT NULL, updated_at TEXT NOT NULL
  );

  CREATE TABLE layer (
    id INTEGER PRIMARY KEY,
    name TEXT NOT NULL UNIQUE,          -- tensor name in the graph
    op TEXT NOT NULL, node TEXT NOT NULL,
    position INTEGER NOT NULL,          -- order in the graph
    dims_json TEXT NOT NULL,            -- concrete per-probe dims after the batch axis
    kind TEXT NOT NULL,                 -- dense | conv | sequence | flat
    units INTEGER NOT NULL,
    pool TEXT NOT NULL                  -- max | mean | last | none
  );

  CREATE TABLE chunk_done (
    layer_id INTEGER NOT NULL REFERENCES layer(id) ON DELETE CASCADE,
    chunk INTEGER NOT NULL,
    PRIMARY KEY (layer_id, chunk)
  ) WITHOUT ROWID;

  CREATE TABLE activation (
    layer_id INTEGER NOT NULL REFERENCES layer(id) ON DELETE CASCADE,
    unit INTEGER NOT NULL,
    chunk INTEGER NOT NULL,
    vals BLOB NOT NULL,                 -- float32 little-endian, one per probe of the chunk
    argmax BLOB,                        -- uint32 per probe: flat spatial/time index of the pooled value
    PRIMARY KEY (layer_id, unit, chunk)
  );

  CREATE TABLE label (id INTEGER PRIMARY KEY, name TEXT NOT NULL UNIQUE);
  CREATE TABLE probe_label (
    probe INTEGER NOT NULL, label INTEGER NOT NULL REFERENCES label(id),
    PRIMARY KEY (probe, label)
  ) WITHOUT ROWID;
  CREATE TABLE concept (label TEXT PRIMARY KEY, grp TEXT NOT NULL, parent TEXT, description TEXT);
  CREATE TABLE example (probe INTEGER PRIMARY KEY, ext_id TEXT, text TEXT, image TEXT);

  CREATE TABLE score_run (
    id INTEGER PRIMARY KEY CHECK (id = 1),
    key TEXT NOT NULL,                  -- hash of fingerprints, layers and options: scores are reused while it matches
    options_json TEXT NOT NULL, scored_at TEXT NOT NULL
  );
  CREATE TABLE relatedness (
    a INTEGER NOT NULL, b INTEGER NOT NULL, similarity REAL NOT NULL, source TEXT NOT NULL,
    PRIMARY KEY (a, b)
  ) WITHOUT ROWID;
  CREATE TABLE unit_score (
    layer_id INTEGER NOT NULL REFERENCES layer(id) ON DELETE CASCADE,
    unit INTEGER NOT NULL,
    rank INTEGER NOT NULL,              -- 0 = most polysemantic across the study
    concept_count REAL NOT NULL, selectivity REAL NOT NULL, evidence REAL NOT NULL,
    flags TEXT NOT NULL,                -- JSON array
    drivers TEXT NOT NULL,              -- JSON [{label, auroc, q, share}] with label ids
    explanation TEXT,                   -- JSON {labels, iou} or NULL
    active_fraction REAL NOT NULL, mean REAL NOT NULL, max REAL NOT NULL, top_threshold REAL NOT NULL,
    top_probes BLOB NOT NULL, top_values BLOB NOT NULL,
    PRIMARY KEY (layer_id, unit)
  ) WITHOUT ROWID;
  CREATE INDEX unit_score_rank ON unit_score(rank);
  CREATE TABLE unit_label (
    layer_id INTEGER NOT NULL REFERENCES layer(id) ON DELETE CASCADE,
    unit INTEGER NOT NULL, label INTEGER NOT NULL,
    n1 INTEGER NOT NULL, mean_with REAL, mean_without REAL, auroc REAL NOT NULL,   -- a mean over no probes is NULL
    top_hits INTEGER NOT NULL, p REAL NOT NULL, q REAL NOT NULL,
    PRIMARY KEY (layer_id, unit, label)
  ) WITHOUT ROWID;
  CREATE INDEX unit_label_by_label ON unit_label(label, auroc);
  `,
  // 1 → 2: review annotations (core/review). `annotation` is the current state per unit, a cache derived from
  // `annotation_event`, the append-only history that bundles carry and merging unions by event id.
  `
  CREATE TABLE annotation (
    model_fp TEXT NOT NULL, probes_fp TEXT NOT NULL, layer TEXT NOT NULL, unit INTEGER NOT NULL,
    tags TEXT NOT NULL DEFAULT '[]',      -- JSON array of tag names, sorted
    note TEXT NOT NULL DEFAULT '',        -- plain text / Markdown source
    status TEXT NOT NULL DEFAULT 'unreviewed',
    conflicts TEXT NOT NULL DEFAULT '[]', -- JSON array of fields with concurrent edits not yet resolved
    reviewer TEXT, created_at TEXT, updated_at TEXT,
    version INTEGER NOT NULL DEFAULT 0,   -- local optimistic-concurrency counter, +1 per write to this unit
    PRIMARY KEY (model_fp, probes_fp, layer, unit)
  ) WITHOUT ROWID;

  CREATE TABLE annotation_event (
    seq INTEGER PRIMARY KEY,              -- local arrival order; not part of merging
    id TEXT NOT NULL UNIQUE,              -- random UUID, the merge identity
    model_fp TEXT NOT NULL, probes_fp TEXT NOT NULL, layer TEXT NOT NULL, unit INTEGER NOT NULL,
    field TEXT NOT NULL,                  -- note | status | tag:<name>
    old_value TEXT NOT NULL, new_value TEXT NOT NULL, -- JSON values
    parents TEXT NOT NULL,                -- JSON array: ids of this field's latest events when the edit was made
    author TEXT NOT NULL, at TEXT NOT NULL,
    edit TEXT NOT NULL,                   -- events made by one edit share this id (undo reverts them together)
    undoes TEXT,                          -- the edit this event reverts, if any
    origin TEXT NOT NULL,                 -- local | import
    source_id TEXT                        -- the bundle's event id when imported under a layer mapping
  );
  CREATE INDEX annotation_event_key ON annotation_event(model_fp, probes_fp, layer, unit, field);
  CREATE INDEX annotation_event_author ON annotation_event(author, seq);
  CREATE TRIGGER annotation_event_no_update BEFORE UPDATE ON annotation_event
    BEGIN SELECT RAISE(ABORT, 'review history is append-only'); END;
  CREATE TRIGGER annotation_event_no_delete BEFORE DELETE ON annotation_event
    BEGIN SELECT RAISE(ABORT, 'review history is append-only'); END;
  `,
  // 2 → 3: ablations (core/intervene). A run is one setup (layer, mode, probes used, targets) keyed by a hash of
  // everything its results depend on; each unit's cost is committed alone, so a cancelled bulk pass resumes.
  `
  CREATE TABLE ablation_run (
    id INTEGER PRIMARY KEY,
    key TEXT NOT NULL UNIQUE,             -- SHA-256 of model/probe fingerprints, layer, mode, value, sample, seed, targets
    model_fp TEXT NOT NULL, probes_fp TEXT NOT NULL,
    layer TEXT NOT NULL, mode TEXT NOT NULL, value REAL,
    sample INTEGER,                       -- probes used when a seeded sample, NULL for every probe
    seed INTEGER NOT NULL, probes INTEGER NOT NULL,
    metric TEXT NOT NULL, floor REAL NOT NULL, output TEXT NOT NULL, units INTEGER NOT NULL,
    created_at TEXT NOT NULL, updated_at TEXT NOT NULL
  );
  CREATE INDEX ablation_run_layer ON ablation_run(layer, updated_at);
  CREATE TABLE ablation_unit (
    run_id INTEGER NOT NULL REFERENCES ablation_run(id) ON DELETE CASCADE,
    unit INTEGER NOT NULL,
    hurt_count INTEGER NOT NULL, concepts_hurt REAL NOT NULL,
    largest_label TEXT, largest_mean REAL,
    reps INTEGER NOT NULL,                -- bootstrap resamples behind the stored intervals
    cost TEXT NOT NULL,                   -- JSON: per-label means, intervals, p, q, hurt, accuracy
    at TEXT NOT NULL,
    PRIMARY KEY (run_id, unit)
  ) WITHOUT ROWID;
  `,
  // 3 → 4: dead and dense as typed columns instead of words inside a JSON array (read without text matching).
  `
  ALTER TABLE unit_score ADD COLUMN dead INTEGER NOT NULL DEFAULT 0 CHECK (dead IN (0, 1));
  ALTER TABLE unit_score ADD COLUMN dense INTEGER NOT NULL DEFAULT 0 CHECK (dense IN (0, 1));
  UPDATE unit_score SET
    dead = EXISTS (SELECT 1 FROM json_each(unit_score.flags) WHERE value = 'dead'),
    dense = EXISTS (SELECT 1 FROM json_each(unit_score.flags) WHERE value = 'dense');
  ALTER TABLE unit_score DROP COLUMN flags;
  `,
  // 4 → 5: the superposition lens (core/geometry), cached per layer and reused while `key` (a hash of everything
  // it depends on) matches; deleted with its layer.
  `
  CREATE TABLE lens (
    layer_id INTEGER PRIMARY KEY REFERENCES layer(id) ON DELETE CASCADE,
    key TEXT NOT NULL,
    result_json TEXT NOT NULL,            -- the figures (core/geometry/lens.ts LensResult)
    directions BLOB NOT NULL,             -- float32 [concepts × units], row-major: the concept directions
    computed_at TEXT NOT NULL
  );
  `,
  // 5 → 6: the joint driver model (core/score/joint.ts). `unit_driver` is the normalised driver table the screens
  // and exports read: one row per driver, modulator or nested label of a unit. `layer_null` holds the shuffled-label
  // baseline per layer. Stored scores from before are discarded (score_run emptied), so the next scan rescores.
  `
  ALTER TABLE unit_score ADD COLUMN concept_low REAL;    -- 90% bootstrap interval of concept_count
  ALTER TABLE unit_score ADD COLUMN concept_high REAL;
  ALTER TABLE unit_label ADD COLUMN cond_auroc REAL;     -- conditional AUROC in the joint model; NULL when not a candidate
  ALTER TABLE unit_label ADD COLUMN cond_q REAL;         -- its BH q across the layer's joint tests; NULL when not tested
  CREATE TABLE unit_driver (
    layer_id INTEGER NOT NULL REFERENCES layer(id) ON DELETE CASCADE,
    unit INTEGER NOT NULL,
    position INTEGER NOT NULL,            -- drivers by share (largest first), then modulators, then nested labels
    kind TEXT NOT NULL CHECK (kind IN ('driver', 'modulator', 'nested')),
    labels TEXT NOT NULL,                 -- JSON label ids; 2–3 for a compound (all present together)
    of_labels TEXT,                       -- JSON label ids of the driver a modulator raises / a nested label contains
    share REAL, share_low REAL, share_high REAL,   -- drivers only
    auroc REAL NOT NULL,                  -- driver: alone vs none; modulator: with vs without inside the driver's alone probes; nested: marginal
    q REAL,                               -- BH across the layer's joint tests; NULL for nested
    effect REAL,                          -- mean alone − mean none (modulator: mean with − mean without)
    upper REAL,                           -- fraction of the none group below the alone group's median
    n_alone INTEGER, mean_alone REAL, n_others INTEGER, mean_others REAL, n_none INTEGER, mean_none REAL,
    same_as TEXT,                         -- JSON: labels of drivers counted as the same concept (probe IoU ≥ 0.9)
    PRIMARY KEY (layer_id, unit, position)
  ) WITHOUT ROWID;
  CREATE TABLE layer_null (
    layer_id INTEGER PRIMARY KEY REFERENCES layer(id) ON DELETE CASCADE,
    units_sampled INTEGER NOT NULL,       -- units scored again with shuffled labels
    mixed_sampled INTEGER NOT NULL,       -- of those, called mixed (concept count ≥ mixed_at)
    mixed_expected REAL NOT NULL,         -- scaled to the layer: mixed_sampled / units_sampled × units
    mixed_real INTEGER NOT NULL,          -- units called mixed with the real labels
    mixed_at REAL NOT NULL,
    seed INTEGER NOT NULL
  );
  DELETE FROM score_run;
  `,
  // 6 → 7: activation blobs may be stored in a smaller lossless layout; `enc` names it (core/store/codec.ts:
  // 0 plain float32, 1 zero mask + the non-zero float32s). Rows written before keep 0.
  `
  ALTER TABLE activation ADD COLUMN enc INTEGER NOT NULL DEFAULT 0;
  `,
  // 7 → 8: sparse dictionaries (core/dictionary), one per layer. While training, the row is the checkpoint of the
  // last finished epoch (weights in the normalised space, Adam moments, firing counters) that a resume starts from;
  // once done it holds the dictionary in the layer's units and its metrics. `key` hashes everything it depends on.
  `
  CREATE TABLE dictionary (
    layer_id INTEGER PRIMARY KEY REFERENCES layer(id) ON DELETE CASCADE,
    key TEXT NOT NULL,
    state TEXT NOT NULL CHECK (state IN ('training', 'done')),
    epoch INTEGER NOT NULL,               -- epochs finished
    options_json TEXT NOT NULL,           -- core/dictionary/train.ts DictionaryOptions
    units INTEGER NOT NULL, features INTEGER NOT NULL, k INTEGER NOT NULL,
    scale REAL NOT NULL,                  -- while training: the inputs' normalising divisor
    w_enc BLOB NOT NULL,                  -- float32 [features × units], row-major
    b_enc BLOB NOT NULL,                  -- float32 [features]
    w_dec BLOB NOT NULL,                  -- float32 [features × units], unit-norm rows
    b_dec BLOB NOT NULL,                  -- float32 [units]
    adam_step INTEGER NOT NULL,
    adam BLOB,                            -- float32 moments m then v of w_enc, b_enc, w_dec, b_dec; NULL once done
    since_fired BLOB,                     -- float64 [features]: probes since each feature fired; NULL once done
    losses_json TEXT NOT NULL,            -- mean squared error per finished epoch (normalised space)
    metrics_json TEXT,                    -- core/dictionary/train.ts LayerMetrics without firingRate; NULL while training
    firing_rate BLOB,                     -- float32 [features]; NULL while training
    updated_at TEXT NOT NULL
  );
  `,
  // 8 → 9: a CRC-32 of each activation blob, written by the scan and checked on every read, so a damaged page of a
  // study is refused instead of read as wrong values. NULL in rows written before this version (not checked).
  `
  ALTER TABLE activation ADD COLUMN crc INTEGER;
  `,
];

export const SCHEMA_VERSION = migrations.length;
