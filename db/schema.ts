/**
 * The SQLite schema (Drizzle). Migrations under db/migrations/ are generated from this file
 * with `npm run db:generate` and never edited by hand.
 *
 * Times are stored as integer milliseconds since the epoch (`timestamp_ms` mode).
 */
import { sql } from "drizzle-orm";
import { index, integer, primaryKey, real, sqliteTable, text, uniqueIndex } from "drizzle-orm/sqlite-core";

// The names of roles, states and doors live in a module without the database, so that client
// code can use them without pulling the schema into a browser bundle.
export {
  DOORS,
  NOTICE_KINDS,
  ROLES,
  RUN_STATUSES,
  STEP_STATUSES,
  SURVEY_ROLES,
  type Door,
  type NoticeKind,
  type Role,
  type RunStatus,
  type StepStatus,
  type SurveyRole,
} from "./vocabulary";
import { RUN_STATUSES, ROLES, STEP_STATUSES, DOORS, NOTICE_KINDS, SURVEY_ROLES } from "./vocabulary";

const now = sql`(unixepoch('subsec') * 1000)`;

export const users = sqliteTable("users", {
  id: integer("id").primaryKey({ autoIncrement: true }),
  email: text("email").notNull().unique(),
  name: text("name").notNull(),
  role: text("role", { enum: ROLES }).notNull(),
  passwordHash: text("password_hash").notNull(),
  /** Deactivated users cannot sign in; they are never deleted so the audit trail keeps their name. */
  active: integer("active", { mode: "boolean" }).notNull().default(true),
  /** Set when an administrator issued a temporary password: the user must choose their own at the next sign-in. */
  mustChangePassword: integer("must_change_password", { mode: "boolean" }).notNull().default(false),
  createdAt: integer("created_at", { mode: "timestamp_ms" }).notNull().default(now),
});

export const surveys = sqliteTable("surveys", {
  id: integer("id").primaryKey({ autoIncrement: true }),
  /** Short stable name used on the command line, e.g. "quillmoor". */
  slug: text("slug").notNull().unique(),
  name: text("name").notNull(),
  site: text("site").notNull().default(""),
  client: text("client").notNull().default(""),
  description: text("description").notNull().default(""),
  /** What the survey is for, in a sentence or two. */
  purpose: text("purpose").notNull().default(""),
  /** First and last day in the field, ISO dates "YYYY-MM-DD" (empty when not known). */
  startDate: text("start_date").notNull().default(""),
  endDate: text("end_date").notNull().default(""),
  notes: text("notes").notNull().default(""),
  createdAt: integer("created_at", { mode: "timestamp_ms" }).notNull().default(now),
});

/** The people on a survey and what they do on it (see SURVEY_ROLES in db/vocabulary.ts). */
export const surveyPeople = sqliteTable(
  "survey_people",
  {
    surveyId: integer("survey_id")
      .notNull()
      .references(() => surveys.id),
    userId: integer("user_id")
      .notNull()
      .references(() => users.id),
    role: text("role", { enum: SURVEY_ROLES }).notNull().default("processor"),
    addedAt: integer("added_at", { mode: "timestamp_ms" }).notNull().default(now),
  },
  (t) => [primaryKey({ columns: [t.surveyId, t.userId] })],
);

export const profiles = sqliteTable(
  "profiles",
  {
    id: integer("id").primaryKey({ autoIncrement: true }),
    surveyId: integer("survey_id")
      .notNull()
      .references(() => surveys.id),
    /** Line name, e.g. "QM-1". */
    name: text("name").notNull(),
    description: text("description").notNull().default(""),
    /** Bearing of the line from its start to its end, degrees clockwise from grid north (null: not stated). */
    orientationDeg: real("orientation_deg"),
    /** The spread in words, e.g. "48 vertical 4.5 Hz geophones at 1 m". */
    spreadDescription: text("spread_description").notNull().default(""),
    /** The coordinate reference of the end coordinates, "EPSG:nnnn" (empty: none stated). */
    crs: text("crs").notNull().default(""),
    /** Line ends in the stated reference (easting/northing or x/y in its unit). */
    startX: real("start_x"),
    startY: real("start_y"),
    endX: real("end_x"),
    endY: real("end_y"),
  },
  (t) => [uniqueIndex("profiles_survey_name").on(t.surveyId, t.name)],
);

/** A folder of field files at one moment: its content hash identifies it. */
export const datasets = sqliteTable(
  "datasets",
  {
    id: integer("id").primaryKey({ autoIncrement: true }),
    surveyId: integer("survey_id").references(() => surveys.id),
    profileId: integer("profile_id").references(() => profiles.id),
    name: text("name").notNull(),
    /** Absolute folder path when registered. */
    folderPath: text("folder_path").notNull(),
    /** SHA-256 over the sorted (name, file hash) list. */
    contentHash: text("content_hash").notNull(),
    fileCount: integer("file_count").notNull(),
    totalBytes: integer("total_bytes").notNull(),
    createdAt: integer("created_at", { mode: "timestamp_ms" }).notNull().default(now),
  },
  (t) => [uniqueIndex("datasets_folder_hash").on(t.folderPath, t.contentHash)],
);

export const datasetFiles = sqliteTable(
  "dataset_files",
  {
    id: integer("id").primaryKey({ autoIncrement: true }),
    datasetId: integer("dataset_id")
      .notNull()
      .references(() => datasets.id),
    name: text("name").notNull(),
    sizeBytes: integer("size_bytes").notNull(),
    sha256: text("sha256").notNull(),
  },
  (t) => [index("dataset_files_dataset").on(t.datasetId)],
);

/** A named pipeline; its content lives in versions. */
export const pipelines = sqliteTable("pipelines", {
  id: integer("id").primaryKey({ autoIncrement: true }),
  name: text("name").notNull().unique(),
  surveyId: integer("survey_id").references(() => surveys.id),
  createdAt: integer("created_at", { mode: "timestamp_ms" }).notNull().default(now),
});

/** Every saved change of a pipeline is a new version; versions are never overwritten. */
export const pipelineVersions = sqliteTable(
  "pipeline_versions",
  {
    id: integer("id").primaryKey({ autoIncrement: true }),
    pipelineId: integer("pipeline_id")
      .notNull()
      .references(() => pipelines.id),
    version: integer("version").notNull(),
    /** The YAML text as written. */
    sourceText: text("source_text").notNull(),
    /** Where it was read from, if from a file. */
    sourcePath: text("source_path"),
    /** The validated definition (steps with full parameters), JSON. */
    definitionJson: text("definition_json").notNull(),
    contentHash: text("content_hash").notNull(),
    createdByUserId: integer("created_by_user_id").references(() => users.id),
    createdByLabel: text("created_by_label").notNull(),
    createdAt: integer("created_at", { mode: "timestamp_ms" }).notNull().default(now),
  },
  (t) => [
    uniqueIndex("pipeline_versions_number").on(t.pipelineId, t.version),
    index("pipeline_versions_hash").on(t.pipelineId, t.contentHash),
  ],
);

export const runs = sqliteTable(
  "runs",
  {
    id: integer("id").primaryKey({ autoIncrement: true }),
    pipelineVersionId: integer("pipeline_version_id")
      .notNull()
      .references(() => pipelineVersions.id),
    datasetId: integer("dataset_id")
      .notNull()
      .references(() => datasets.id),
    /** The run this one reruns, if any. */
    parentRunId: integer("parent_run_id"),
    /** Step id the rerun started from (overrides apply from here). */
    rerunFromStep: text("rerun_from_step"),
    /** Parameter overrides of a rerun, JSON: { "<step label>": { param: value } }. */
    overridesJson: text("overrides_json").notNull().default("{}"),
    startedByUserId: integer("started_by_user_id").references(() => users.id),
    /** Person or process label shown when no user is known (e.g. OS user on the CLI). */
    startedByLabel: text("started_by_label").notNull(),
    door: text("door", { enum: DOORS }).notNull(),
    status: text("status", { enum: RUN_STATUSES }).notNull().default("queued"),
    /** Set by the web or a signal; the runner stops at the next check. */
    cancelRequested: integer("cancel_requested", { mode: "boolean" }).notNull().default(false),
    /** Process executing the run, for interrupted-run detection. */
    hostPid: integer("host_pid"),
    /** Last sign of life of the executing process (written every few seconds while it runs). */
    heartbeatAt: integer("heartbeat_at", { mode: "timestamp_ms" }),
    /**
     * The geometry table as it was when the run was created, stored as an artifact (its hash), so
     * reruns and resumes use the same table even if the file changes or disappears.
     */
    geometryTableHash: text("geometry_table_hash"),
    error: text("error"),
    createdAt: integer("created_at", { mode: "timestamp_ms" }).notNull().default(now),
    startedAt: integer("started_at", { mode: "timestamp_ms" }),
    finishedAt: integer("finished_at", { mode: "timestamp_ms" }),
  },
  (t) => [index("runs_status").on(t.status), index("runs_created").on(t.createdAt)],
);

export const runSteps = sqliteTable(
  "run_steps",
  {
    id: integer("id").primaryKey({ autoIncrement: true }),
    runId: integer("run_id")
      .notNull()
      .references(() => runs.id),
    /** 0-based position in the pipeline. */
    position: integer("position").notNull(),
    /** Label in the pipeline (defaults to the step id; unique within a pipeline). */
    label: text("label").notNull(),
    stepId: text("step_id").notNull(),
    stepVersion: integer("step_version").notNull(),
    /** Validated parameters with defaults filled in, canonical JSON. */
    paramsJson: text("params_json").notNull(),
    /** Hash of step id, version, canonical params and input artifact hashes. */
    cacheKey: text("cache_key"),
    /** { slot: artifact hash } read by the step. */
    inputsJson: text("inputs_json").notNull().default("{}"),
    /** { slot: artifact hash } written by the step. */
    outputsJson: text("outputs_json").notNull().default("{}"),
    cacheHit: integer("cache_hit", { mode: "boolean" }).notNull().default(false),
    /** For a cache hit: the run step that computed the outputs. */
    cacheSourceStepId: integer("cache_source_step_id"),
    status: text("status", { enum: STEP_STATUSES }).notNull().default("waiting"),
    progress: real("progress").notNull().default(0),
    progressMessage: text("progress_message"),
    summaryJson: text("summary_json"),
    seriesJson: text("series_json"),
    error: text("error"),
    startedAt: integer("started_at", { mode: "timestamp_ms" }),
    finishedAt: integer("finished_at", { mode: "timestamp_ms" }),
    durationMs: integer("duration_ms"),
  },
  (t) => [uniqueIndex("run_steps_position").on(t.runId, t.position), index("run_steps_cache_key").on(t.cacheKey)],
);

export const stepLogs = sqliteTable(
  "step_logs",
  {
    id: integer("id").primaryKey({ autoIncrement: true }),
    runId: integer("run_id")
      .notNull()
      .references(() => runs.id),
    runStepId: integer("run_step_id").references(() => runSteps.id),
    at: integer("at", { mode: "timestamp_ms" }).notNull(),
    level: text("level", { enum: ["debug", "info", "warn", "error"] }).notNull(),
    message: text("message").notNull(),
    dataJson: text("data_json"),
  },
  (t) => [index("step_logs_run").on(t.runId, t.id), index("step_logs_step").on(t.runStepId, t.id)],
);

/** Content-addressed artifacts on disk under data/artifacts/. */
export const artifacts = sqliteTable("artifacts", {
  /** SHA-256 of the artifact bytes, hex. */
  hash: text("hash").primaryKey(),
  /** The slot kind, e.g. "gathers", "model", "picks". */
  kind: text("kind").notNull(),
  /** Path relative to the data folder. */
  path: text("path").notNull(),
  sizeBytes: integer("size_bytes").notNull(),
  producedByRunStepId: integer("produced_by_run_step_id"),
  createdAt: integer("created_at", { mode: "timestamp_ms" }).notNull().default(now),
});

/** A lead's review of a run. */
export const reviews = sqliteTable(
  "reviews",
  {
    id: integer("id").primaryKey({ autoIncrement: true }),
    runId: integer("run_id")
      .notNull()
      .references(() => runs.id),
    reviewerUserId: integer("reviewer_user_id")
      .notNull()
      .references(() => users.id),
    decision: text("decision", { enum: ["approved", "returned"] }).notNull(),
    comment: text("comment").notNull().default(""),
    at: integer("at", { mode: "timestamp_ms" }).notNull().default(now),
  },
  (t) => [index("reviews_run").on(t.runId)],
);

/** Who did what, when, with before and after. Append-only. */
export const auditEvents = sqliteTable(
  "audit_events",
  {
    id: integer("id").primaryKey({ autoIncrement: true }),
    at: integer("at", { mode: "timestamp_ms" }).notNull().default(now),
    actorUserId: integer("actor_user_id").references(() => users.id),
    actorLabel: text("actor_label").notNull(),
    door: text("door", { enum: DOORS }).notNull(),
    /** Verb, e.g. "run.start", "run.rerun", "run.cancel", "user.add", "pipeline.version", "review.approve". */
    action: text("action").notNull(),
    entityType: text("entity_type").notNull(),
    entityId: text("entity_id").notNull(),
    beforeJson: text("before_json"),
    afterJson: text("after_json"),
    /**
     * Hash chain (db/queries/audit-chain.ts): `hash` of the event before this one (64 zeros for the
     * first), and SHA-256 over this event's fields and `prev_hash`. Null only in databases made
     * before the chain existed, until they are sealed on open.
     */
    prevHash: text("prev_hash"),
    hash: text("hash"),
  },
  (t) => [index("audit_events_entity").on(t.entityType, t.entityId), index("audit_events_at").on(t.at)],
);

/** Folders a watcher looks after, and what it last processed. */
export const watchedFolders = sqliteTable("watched_folders", {
  id: integer("id").primaryKey({ autoIncrement: true }),
  folderPath: text("folder_path").notNull().unique(),
  pipelinePath: text("pipeline_path").notNull(),
  /** Content hash of the dataset last run, so a restart does not redo it. */
  lastContentHash: text("last_content_hash"),
  lastRunId: integer("last_run_id"),
  updatedAt: integer("updated_at", { mode: "timestamp_ms" }).notNull().default(now),
});

/** What a watcher saw: files accepted, ignored or rejected, with the reason. */
export const watchEvents = sqliteTable(
  "watch_events",
  {
    id: integer("id").primaryKey({ autoIncrement: true }),
    folderId: integer("folder_id")
      .notNull()
      .references(() => watchedFolders.id),
    at: integer("at", { mode: "timestamp_ms" }).notNull().default(now),
    file: text("file"),
    event: text("event", { enum: ["accepted", "ignored", "rejected", "run-started", "run-skipped", "superseded"] }).notNull(),
    reason: text("reason").notNull().default(""),
    runId: integer("run_id"),
  },
  (t) => [index("watch_events_folder").on(t.folderId, t.id)],
);

/** Files of a dataset rejected by a reader in a run (the run went on without them). */
export const rejectedFiles = sqliteTable(
  "rejected_files",
  {
    runId: integer("run_id")
      .notNull()
      .references(() => runs.id),
    name: text("name").notNull(),
    reason: text("reason").notNull(),
  },
  (t) => [primaryKey({ columns: [t.runId, t.name] })],
);

/**
 * Intermediate results a step records while it runs (e.g. one model per inversion iteration):
 * each an artifact, attached to the run step that computed it. A cache hit shows the records of
 * its source step (run_steps.cache_source_step_id).
 */
export const stepIntermediates = sqliteTable(
  "step_intermediates",
  {
    id: integer("id").primaryKey({ autoIncrement: true }),
    runStepId: integer("run_step_id")
      .notNull()
      .references(() => runSteps.id),
    /** What it is, e.g. "model", "gradient", "synthetic". */
    kind: text("kind").notNull(),
    /** Orders the records of one kind, e.g. the iteration. */
    index: integer("index").notNull(),
    label: text("label"),
    artifactHash: text("artifact_hash").notNull(),
    metaJson: text("meta_json"),
    at: integer("at", { mode: "timestamp_ms" }).notNull().default(now),
  },
  (t) => [uniqueIndex("step_intermediates_kind_index").on(t.runStepId, t.kind, t.index)],
);

/** The latest checkpoint of a long step, under the step's cache key: a resumed run finds it. */
export const stepCheckpoints = sqliteTable("step_checkpoints", {
  cacheKey: text("cache_key").primaryKey(),
  artifactHash: text("artifact_hash").notNull(),
  at: integer("at", { mode: "timestamp_ms" }).notNull().default(now),
});

/**
 * Reproductions of a run: the run executed again from its recorded inputs and settings in a
 * scratch data folder without the cache, every artifact compared (pipeline/reproduce.ts).
 */
export const runReproductions = sqliteTable(
  "run_reproductions",
  {
    id: integer("id").primaryKey({ autoIncrement: true }),
    runId: integer("run_id")
      .notNull()
      .references(() => runs.id),
    requestedByUserId: integer("requested_by_user_id").references(() => users.id),
    requestedByLabel: text("requested_by_label").notNull(),
    door: text("door", { enum: DOORS }).notNull(),
    /** "running" while it goes; then "identical", "within-tolerance", "different" or "failed". */
    verdict: text("verdict", { enum: ["running", "identical", "within-tolerance", "different", "failed"] }).notNull().default("running"),
    /** Progress while running (0..1) and what is being done. */
    progress: real("progress").notNull().default(0),
    progressMessage: text("progress_message"),
    /** Per step and artifact: hashes, comparison, differences; the tolerance used. JSON. */
    detailsJson: text("details_json"),
    error: text("error"),
    hostPid: integer("host_pid"),
    startedAt: integer("started_at", { mode: "timestamp_ms" }).notNull().default(now),
    finishedAt: integer("finished_at", { mode: "timestamp_ms" }),
  },
  (t) => [index("run_reproductions_run").on(t.runId, t.id)],
);

/**
 * The lead's interpretation of an approved run, one text per report section. Versioned: every
 * save is a new row with the next version number of its (run, section); rows are never changed.
 */
export const interpretations = sqliteTable(
  "interpretations",
  {
    id: integer("id").primaryKey({ autoIncrement: true }),
    runId: integer("run_id")
      .notNull()
      .references(() => runs.id),
    /** Report section the text belongs to, e.g. "summary", "model", "data-fit", "limitations". */
    section: text("section").notNull(),
    text: text("text").notNull(),
    /** 1, 2, ... per (run, section). */
    version: integer("version").notNull(),
    authorUserId: integer("author_user_id").references(() => users.id),
    /** Name of the author (or the OS user on the command line) as it was when saved. */
    authorLabel: text("author_label").notNull(),
    at: integer("at", { mode: "timestamp_ms" }).notNull().default(now),
  },
  (t) => [uniqueIndex("interpretations_version").on(t.runId, t.section, t.version)],
);

/**
 * Mail notices waiting to be sent, and sent: the engine and the web write rows (db/queries/notices.ts),
 * a sender delivers them (the web server on a short interval, the command line at the end of a
 * run). `sentAt` set: delivered; `error`: the last failed attempt.
 */
export const notices = sqliteTable(
  "notices",
  {
    id: integer("id").primaryKey({ autoIncrement: true }),
    kind: text("kind", { enum: NOTICE_KINDS }).notNull(),
    toUserId: integer("to_user_id").references(() => users.id),
    toAddress: text("to_address").notNull(),
    subject: text("subject").notNull(),
    body: text("body").notNull(),
    /** What it is about, e.g. "run" and its id. */
    entityType: text("entity_type").notNull().default(""),
    entityId: text("entity_id").notNull().default(""),
    createdAt: integer("created_at", { mode: "timestamp_ms" }).notNull().default(now),
    /** A sender took it (so two senders never mail it twice); a claim older than a minute is taken over. */
    claimedAt: integer("claimed_at", { mode: "timestamp_ms" }),
    sentAt: integer("sent_at", { mode: "timestamp_ms" }),
    attempts: integer("attempts").notNull().default(0),
    error: text("error"),
  },
  (t) => [index("notices_unsent").on(t.sentAt, t.id)],
);

/** Notices a person chose not to get (absent row: the notice is wanted). */
export const noticeOptOuts = sqliteTable(
  "notice_opt_outs",
  {
    userId: integer("user_id")
      .notNull()
      .references(() => users.id),
    kind: text("kind", { enum: NOTICE_KINDS }).notNull(),
  },
  (t) => [primaryKey({ columns: [t.userId, t.kind] })],
);

/**
 * Mailed links that set a password: a forgotten-password reset or an invitation. Only the SHA-256
 * of the random token is kept; a link works once (`usedAt`) and until `expiresAt`.
 */
export const passwordTokens = sqliteTable(
  "password_tokens",
  {
    id: integer("id").primaryKey({ autoIncrement: true }),
    userId: integer("user_id")
      .notNull()
      .references(() => users.id),
    purpose: text("purpose", { enum: ["reset", "invitation"] }).notNull(),
    tokenHash: text("token_hash").notNull().unique(),
    createdAt: integer("created_at", { mode: "timestamp_ms" }).notNull().default(now),
    expiresAt: integer("expires_at", { mode: "timestamp_ms" }).notNull(),
    usedAt: integer("used_at", { mode: "timestamp_ms" }),
  },
  (t) => [index("password_tokens_user").on(t.userId)],
);

/**
 * A crew's upload of field files to one profile from the browser. Nothing of it becomes a dataset
 * while it is open: marking it complete turns its accepted files into one dataset.
 */
export const uploadSessions = sqliteTable(
  "upload_sessions",
  {
    id: integer("id").primaryKey({ autoIncrement: true }),
    surveyId: integer("survey_id")
      .notNull()
      .references(() => surveys.id),
    profileId: integer("profile_id")
      .notNull()
      .references(() => profiles.id),
    createdByUserId: integer("created_by_user_id").references(() => users.id),
    createdByLabel: text("created_by_label").notNull(),
    state: text("state", { enum: ["open", "complete", "abandoned"] }).notNull().default("open"),
    /** The dataset its accepted files became, once complete. */
    datasetId: integer("dataset_id").references(() => datasets.id),
    /** The run queued on completion (the profile's pipeline), if any. */
    runId: integer("run_id"),
    createdAt: integer("created_at", { mode: "timestamp_ms" }).notNull().default(now),
    completedAt: integer("completed_at", { mode: "timestamp_ms" }),
  },
  (t) => [index("upload_sessions_profile").on(t.profileId, t.id)],
);

/** One file sent in an upload: its transfer, then the verdict of the checks on arrival. */
export const uploadFiles = sqliteTable(
  "upload_files",
  {
    id: integer("id").primaryKey({ autoIncrement: true }),
    sessionId: integer("session_id")
      .notNull()
      .references(() => uploadSessions.id),
    /** The resumable-transfer id (the last segment of its upload address). */
    transferId: text("transfer_id").notNull().unique(),
    name: text("name").notNull(),
    sizeBytes: integer("size_bytes").notNull(),
    /** Bytes the server received for it over every request (a resumed transfer sends none twice). */
    receivedBytes: integer("received_bytes").notNull().default(0),
    /** When the server last received bytes for it (null: none yet); an idle transfer expires from here. */
    lastReceivedAt: integer("last_received_at", { mode: "timestamp_ms" }),
    sha256: text("sha256"),
    /** Format told from the bytes: "seg2", "segy", "geometry-table". */
    format: text("format"),
    /** "expired": a transfer that received no byte for TRACEWRIGHT_UPLOAD_STALE_HOURS, its partial file removed. */
    verdict: text("verdict", { enum: ["receiving", "accepted", "duplicate", "refused", "expired"] }).notNull().default("receiving"),
    /** Why it was refused (the reader's message, with file name and byte offset) or what it duplicates. */
    message: text("message").notNull().default(""),
    /** Byte offset the reader named, for a refused binary file. */
    byteOffset: integer("byte_offset"),
    /** Where the accepted content is kept, relative to the data folder (content-addressed). */
    storedPath: text("stored_path"),
    createdAt: integer("created_at", { mode: "timestamp_ms" }).notNull().default(now),
    checkedAt: integer("checked_at", { mode: "timestamp_ms" }),
  },
  (t) => [index("upload_files_session").on(t.sessionId, t.id), index("upload_files_sha").on(t.sha256)],
);
