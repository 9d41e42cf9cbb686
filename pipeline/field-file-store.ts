/**
 * Where the content of uploaded field files is kept, content-addressed by SHA-256 and stored once:
 *
 * - the data folder (the default): <data>/uploads/content/<first two hex>/<sha256>;
 * - an S3-compatible object store through the AWS SDK, when TRACEWRIGHT_OBJECT_STORE_URL is set:
 *   object `<prefix>field-files/<first two hex>/<sha256>` in TRACEWRIGHT_OBJECT_STORE_BUCKET. The
 *   engine reads files from disk, so a dataset made from stored content is fetched back into the
 *   data folder's copy (the same path as the default's), checked against its hash on the way.
 *
 * A file's location is recorded with it (upload_files.stored_path): a path relative to the data
 * folder, or `s3://<bucket>/<key>`. A location is read with the store that wrote it, whatever the
 * setting is today, so switching stores does not lose what was kept before.
 *
 * Errors of the store (no bucket, credentials refused, nothing listening) become
 * {@link ObjectStoreError}, naming the setting to look at and the object key.
 */
import fs from "node:fs";
import path from "node:path";
import { z } from "zod";
import { dataDir } from "../db/paths";
import { hashFile } from "./dataset-folder";
import { AppError } from "./errors";

/** Relative path (to the data folder) of the data folder's copy of content with this SHA-256. */
export function contentRelativePath(sha256: string): string {
  if (!/^[0-9a-f]{64}$/.test(sha256)) throw new AppError("bad-input", `"${sha256}" is not a SHA-256 (64 hex digits expected)`, { field: "sha256" });
  return path.join("uploads", "content", sha256.slice(0, 2), sha256);
}

/** Absolute path of the data folder's copy of content with this SHA-256. */
export function contentFilePath(sha256: string): string {
  return path.join(dataDir(), contentRelativePath(sha256));
}

/** Where a field file's content is kept, and what its setting is. */
export interface FieldFileStore {
  /** "data-folder" (the default) or "object-store". */
  readonly kind: "data-folder" | "object-store";
  /** For people: "the data folder /srv/tw/uploads/content" or "object store http://…, bucket field". */
  readonly description: string;
  /**
   * Keeps the file at `filePath`, whose content has SHA-256 `sha256` (the caller hashed it), once:
   * content already kept is not written again. The file at `filePath` is moved or removed.
   *
   * @returns the location to record and whether bytes were written
   * @throws ObjectStoreError when the object store refuses or cannot be reached (the file is left in place)
   */
  keep(sha256: string, filePath: string): Promise<{ location: string; written: boolean }>;
  /** True when content with this SHA-256 is kept. @throws ObjectStoreError */
  has(sha256: string): Promise<boolean>;
}

/** A failure of the object store: names the setting to look at and the object key. HTTP 503. */
export class ObjectStoreError extends AppError {
  readonly setting: string;
  readonly key: string;
  constructor(message: string, setting: string, key: string, cause?: unknown) {
    super("store-unavailable", message, { field: setting, file: key }, { cause });
    this.name = "ObjectStoreError";
    this.setting = setting;
    this.key = key;
  }
}

/** The data folder's store: today's behaviour. */
export const dataFolderStore: FieldFileStore = {
  kind: "data-folder",
  get description() {
    return `the data folder (${path.join(dataDir(), "uploads", "content")})`;
  },
  async keep(sha256, filePath) {
    const location = contentRelativePath(sha256);
    const target = path.join(dataDir(), location);
    if (fs.existsSync(target) && hashFile(target) === sha256) {
      fs.rmSync(filePath, { force: true });
      return { location, written: false };
    }
    fs.mkdirSync(path.dirname(target), { recursive: true });
    fs.renameSync(filePath, target);
    return { location, written: true };
  },
  async has(sha256) {
    const target = contentFilePath(sha256);
    return fs.existsSync(target);
  },
};

/** Settings of the object store, from the environment. */
export interface ObjectStoreSettings {
  /** Endpoint URL (TRACEWRIGHT_OBJECT_STORE_URL), e.g. http://127.0.0.1:9000 or https://s3.eu-west-1.amazonaws.com. */
  url: string;
  /** Bucket (TRACEWRIGHT_OBJECT_STORE_BUCKET); it must exist. */
  bucket: string;
  /** Region (TRACEWRIGHT_OBJECT_STORE_REGION). @default "us-east-1" */
  region: string;
  /** Access key id and secret (TRACEWRIGHT_OBJECT_STORE_ACCESS_KEY_ID, TRACEWRIGHT_OBJECT_STORE_SECRET_ACCESS_KEY); null: the AWS SDK's own credential chain. */
  credentials: { accessKeyId: string; secretAccessKey: string } | null;
  /** Bucket in the path (http://host/bucket/key) rather than the host name (TRACEWRIGHT_OBJECT_STORE_PATH_STYLE). @default true, as S3-compatible servers expect */
  pathStyle: boolean;
  /** Prefix of every key (TRACEWRIGHT_OBJECT_STORE_PREFIX), e.g. "tracewright/". @default "" */
  prefix: string;
  /** Tries per request, the first included (TRACEWRIGHT_OBJECT_STORE_ATTEMPTS). @default 3 */
  attempts: number;
}

const SETTING = {
  url: "TRACEWRIGHT_OBJECT_STORE_URL",
  bucket: "TRACEWRIGHT_OBJECT_STORE_BUCKET",
  region: "TRACEWRIGHT_OBJECT_STORE_REGION",
  accessKeyId: "TRACEWRIGHT_OBJECT_STORE_ACCESS_KEY_ID",
  secretAccessKey: "TRACEWRIGHT_OBJECT_STORE_SECRET_ACCESS_KEY",
  pathStyle: "TRACEWRIGHT_OBJECT_STORE_PATH_STYLE",
  prefix: "TRACEWRIGHT_OBJECT_STORE_PREFIX",
  attempts: "TRACEWRIGHT_OBJECT_STORE_ATTEMPTS",
} as const;

/** The names of the object store's settings, for messages and documentation. */
export const OBJECT_STORE_SETTINGS = SETTING;

const blankToUndefined = (v: string | undefined) => (v === undefined || v.trim() === "" ? undefined : v.trim());

const settingsSchema = z.object({
  [SETTING.url]: z
    .string()
    .url(`${SETTING.url} must be an http:// or https:// address`)
    .refine((v) => /^https?:\/\//.test(v), `${SETTING.url} must be an http:// or https:// address`),
  [SETTING.bucket]: z
    .string({ error: `${SETTING.bucket} must name the bucket when ${SETTING.url} is set` })
    .regex(/^[a-z0-9][a-z0-9.-]{1,61}[a-z0-9]$/, `${SETTING.bucket} must be a bucket name of 3 to 63 lower-case letters, digits, dots and hyphens`),
  [SETTING.region]: z.string().default("us-east-1"),
  [SETTING.accessKeyId]: z.string().optional(),
  [SETTING.secretAccessKey]: z.string().optional(),
  [SETTING.pathStyle]: z
    .enum(["true", "false", "1", "0", "yes", "no"], { message: `${SETTING.pathStyle} must be true or false` })
    .default("true")
    .transform((v) => v === "true" || v === "1" || v === "yes"),
  [SETTING.prefix]: z
    .string()
    .regex(/^[A-Za-z0-9._/-]*$/, `${SETTING.prefix} may hold letters, digits, ".", "_", "-" and "/" only`)
    .default(""),
  [SETTING.attempts]: z.coerce
    .number({ message: `${SETTING.attempts} must be a whole number from 1 to 10` })
    .int(`${SETTING.attempts} must be a whole number from 1 to 10`)
    .min(1, `${SETTING.attempts} must be a whole number from 1 to 10`)
    .max(10, `${SETTING.attempts} must be a whole number from 1 to 10`)
    .default(3),
});

/**
 * The object store's settings from the environment, or null when TRACEWRIGHT_OBJECT_STORE_URL is
 * not set (the data folder keeps the files).
 *
 * @throws AppError "bad-input" naming the setting that is wrong or missing
 */
export function objectStoreSettings(env: Record<string, string | undefined> = process.env): ObjectStoreSettings | null {
  const raw = Object.fromEntries(Object.values(SETTING).map((name) => [name, blankToUndefined(env[name])]));
  if (raw[SETTING.url] === undefined) return null;
  const parsed = settingsSchema.safeParse(raw);
  if (!parsed.success) {
    const issue = parsed.error.issues[0];
    throw new AppError("bad-input", issue.message, { field: String(issue.path[0]) });
  }
  const s = parsed.data;
  const id = s[SETTING.accessKeyId];
  const secret = s[SETTING.secretAccessKey];
  if ((id === undefined) !== (secret === undefined)) {
    const missing = id === undefined ? SETTING.accessKeyId : SETTING.secretAccessKey;
    throw new AppError("bad-input", `${missing} must be set with ${id === undefined ? SETTING.secretAccessKey : SETTING.accessKeyId} (or neither, for the AWS SDK's own credential chain)`, { field: missing });
  }
  const prefix = s[SETTING.prefix];
  return {
    url: s[SETTING.url].replace(/\/+$/, ""),
    bucket: s[SETTING.bucket],
    region: s[SETTING.region],
    credentials: id !== undefined && secret !== undefined ? { accessKeyId: id, secretAccessKey: secret } : null,
    pathStyle: s[SETTING.pathStyle],
    prefix: prefix === "" || prefix.endsWith("/") ? prefix : `${prefix}/`,
    attempts: s[SETTING.attempts],
  };
}

/** The object key of content with this SHA-256. */
export function objectKey(settings: Pick<ObjectStoreSettings, "prefix">, sha256: string): string {
  return `${settings.prefix}field-files/${sha256.slice(0, 2)}/${sha256}`;
}

/** The location recorded for an object: s3://<bucket>/<key>. */
export function objectLocation(bucket: string, key: string): string {
  return `s3://${bucket}/${key}`;
}

/** Bucket and key of a recorded s3:// location, or null for a data-folder path. */
export function parseObjectLocation(location: string): { bucket: string; key: string } | null {
  const m = /^s3:\/\/([^/]+)\/(.+)$/.exec(location);
  return m ? { bucket: m[1], key: m[2] } : null;
}

type S3 = typeof import("@aws-sdk/client-s3");
interface SdkError {
  name?: string;
  Code?: string;
  code?: string;
  message?: string;
  $metadata?: { httpStatusCode?: number };
}

/**
 * An SDK failure as a message a person can act on: which setting to look at, which key. HEAD
 * answers carry no error body, so a 404 there is told apart from a missing bucket by the caller.
 */
export function describeStoreFailure(err: unknown, s: ObjectStoreSettings, key: string, doing: string): ObjectStoreError {
  const e = (err ?? {}) as SdkError;
  const status = e.$metadata?.httpStatusCode;
  // HEAD answers have no body, so the SDK names their errors "Unknown"/"NotFound": the status says more.
  const code = [e.Code, e.name, e.code].find((c) => c && !/^(Unknown|UnknownError|NotFound|Error)$/.test(c)) ?? "";
  const where = `object ${key} in bucket ${s.bucket} at ${s.url}`;
  const net = e.code ?? (err instanceof Error && "cause" in err ? ((err.cause as SdkError | undefined)?.code ?? "") : "");
  if (/ECONNREFUSED|ENOTFOUND|EAI_AGAIN|ETIMEDOUT|ECONNRESET|EHOSTUNREACH/.test(`${net} ${e.message ?? ""}`)) {
    return new ObjectStoreError(`Object store not reachable while ${doing} ${where}: ${e.message ?? code}; check ${SETTING.url}`, SETTING.url, key, err);
  }
  if (code === "NoSuchBucket") {
    return new ObjectStoreError(`Object store: bucket ${s.bucket} does not exist at ${s.url} (while ${doing} ${key}); create it or correct ${SETTING.bucket}`, SETTING.bucket, key, err);
  }
  if (status === 403 || /InvalidAccessKeyId|SignatureDoesNotMatch|AccessDenied|ExpiredToken|InvalidToken/.test(code)) {
    return new ObjectStoreError(
      `Object store refused the credentials while ${doing} ${where} (${code || `HTTP ${status}`}); check ${SETTING.accessKeyId} and ${SETTING.secretAccessKey}`,
      SETTING.accessKeyId,
      key,
      err,
    );
  }
  if (status === 301 || code === "PermanentRedirect" || code === "AuthorizationHeaderMalformed") {
    return new ObjectStoreError(`Object store answered that bucket ${s.bucket} is elsewhere while ${doing} ${key} (${code || `HTTP ${status}`}); check ${SETTING.region} and ${SETTING.url}`, SETTING.region, key, err);
  }
  return new ObjectStoreError(`Object store failed while ${doing} ${where}: ${code || "error"}${status ? ` (HTTP ${status})` : ""} ${e.message ?? ""}`.trim(), SETTING.url, key, err);
}

/**
 * The S3-compatible store. The AWS SDK is loaded on first use, so the data-folder default never
 * loads it.
 *
 * Checksums: since 3.729 the SDK adds CRC32 "flexible checksums" to every upload and checks them
 * on downloads. Older and lighter S3-compatible servers (s3rver, which the tests run; some MinIO
 * and Ceph releases) reject a streamed body sent with a trailing checksum (aws-chunked encoding)
 * or answer without one. Content here is addressed and verified by its own SHA-256, so the SDK's
 * checksums are asked for only where the S3 API requires them ("WHEN_REQUIRED").
 */
export function s3Store(settings: ObjectStoreSettings): FieldFileStore & {
  /** Fetches content into the data folder's copy, checked against its SHA-256; returns the file. */
  fetch(sha256: string, key: string): Promise<string>;
  readonly settings: ObjectStoreSettings;
} {
  let client: Promise<{ sdk: S3; s3: InstanceType<S3["S3Client"]> }> | undefined;
  const connect = () =>
    (client ??= import("@aws-sdk/client-s3").then((sdk) => ({
      sdk,
      s3: new sdk.S3Client({
        endpoint: settings.url,
        region: settings.region,
        forcePathStyle: settings.pathStyle,
        maxAttempts: settings.attempts,
        requestChecksumCalculation: "WHEN_REQUIRED",
        responseChecksumValidation: "WHEN_REQUIRED",
        ...(settings.credentials ? { credentials: settings.credentials } : {}),
      }),
    })));

  /** HEAD of the object: its recorded SHA-256, or null when there is no such object. */
  async function head(key: string): Promise<{ sha256: string | null; size: number } | null> {
    const { sdk, s3 } = await connect();
    try {
      const h = await s3.send(new sdk.HeadObjectCommand({ Bucket: settings.bucket, Key: key }));
      return { sha256: h.Metadata?.sha256 ?? null, size: h.ContentLength ?? -1 };
    } catch (err) {
      if ((err as SdkError).$metadata?.httpStatusCode !== 404) throw describeStoreFailure(err, settings, key, "looking up");
      // A HEAD answer has no body: ask the bucket whether it is the bucket or the object that is missing.
      try {
        await s3.send(new sdk.HeadBucketCommand({ Bucket: settings.bucket }));
      } catch (bucketErr) {
        if ((bucketErr as SdkError).$metadata?.httpStatusCode === 404) throw describeStoreFailure({ Code: "NoSuchBucket" }, settings, key, "looking up");
        throw describeStoreFailure(bucketErr, settings, key, "looking up");
      }
      return null;
    }
  }

  const store = {
    kind: "object-store" as const,
    settings,
    description: `the object store ${settings.url}, bucket ${settings.bucket}${settings.prefix ? `, prefix ${settings.prefix}` : ""}`,
    async keep(sha256: string, filePath: string) {
      const key = objectKey(settings, sha256);
      const location = objectLocation(settings.bucket, key);
      const size = fs.statSync(filePath).size;
      const there = await head(key);
      if (there && there.sha256 === sha256 && there.size === size) {
        fs.rmSync(filePath, { force: true });
        return { location, written: false };
      }
      const { sdk, s3 } = await connect();
      try {
        // One PUT (S3 takes up to 5 GiB in one; the upload limit per file is below that by default).
        await s3.send(
          new sdk.PutObjectCommand({
            Bucket: settings.bucket,
            Key: key,
            Body: fs.createReadStream(filePath),
            ContentLength: size,
            ContentType: "application/octet-stream",
            Metadata: { sha256 },
          }),
        );
      } catch (err) {
        throw describeStoreFailure(err, settings, key, "storing");
      }
      fs.rmSync(filePath, { force: true });
      return { location, written: true };
    },
    async has(sha256: string) {
      return (await head(objectKey(settings, sha256))) !== null;
    },
    async fetch(sha256: string, key: string) {
      const target = contentFilePath(sha256);
      if (fs.existsSync(target) && hashFile(target) === sha256) return target;
      const { sdk, s3 } = await connect();
      const tmp = `${target}.${process.pid}.${Date.now()}.fetch`;
      fs.mkdirSync(path.dirname(target), { recursive: true });
      try {
        const got = await s3.send(new sdk.GetObjectCommand({ Bucket: settings.bucket, Key: key }));
        const body = got.Body as NodeJS.ReadableStream | undefined;
        if (!body) throw new Error("empty answer");
        await new Promise<void>((resolve, reject) => {
          const out = fs.createWriteStream(tmp);
          body.on("error", reject);
          out.on("error", reject);
          out.on("finish", () => resolve());
          body.pipe(out);
        });
      } catch (err) {
        fs.rmSync(tmp, { force: true });
        if ((err as SdkError).name === "NoSuchKey" || (err as SdkError).Code === "NoSuchKey") {
          throw new ObjectStoreError(`Object store: object ${key} is not in bucket ${settings.bucket} at ${settings.url}; it was stored there, so it has been deleted or ${SETTING.bucket} names another bucket`, SETTING.bucket, key, err);
        }
        throw describeStoreFailure(err, settings, key, "fetching");
      }
      const got = hashFile(tmp);
      if (got !== sha256) {
        fs.rmSync(tmp, { force: true });
        throw new ObjectStoreError(`Object store: object ${key} in bucket ${settings.bucket} has SHA-256 ${got.slice(0, 12)}…, not ${sha256.slice(0, 12)}… as recorded; it was changed in the store`, SETTING.bucket, key);
      }
      fs.renameSync(tmp, target);
      return target;
    },
  };
  return store;
}

const stores = new Map<string, ReturnType<typeof s3Store>>();

/** One S3 store per distinct settings in this process (one SDK client, its connections reused). */
function s3StoreFor(settings: ObjectStoreSettings): ReturnType<typeof s3Store> {
  const id = JSON.stringify(settings);
  let s = stores.get(id);
  if (!s) {
    s = s3Store(settings);
    stores.set(id, s);
  }
  return s;
}

/**
 * The store chosen by the settings: the object store when TRACEWRIGHT_OBJECT_STORE_URL is set,
 * else the data folder.
 *
 * @throws AppError "bad-input" for a wrong or missing object-store setting
 */
export function fieldFileStore(env: Record<string, string | undefined> = process.env): FieldFileStore {
  const settings = objectStoreSettings(env);
  return settings ? s3StoreFor(settings) : dataFolderStore;
}

/**
 * A local file holding the content recorded at `location`, checked against `sha256`: the data
 * folder's file for a data-folder location; for an s3:// location, the data folder's copy,
 * fetched from the object store when it is missing. The object store must be the one the settings
 * name (same bucket).
 *
 * @throws ObjectStoreError for a failure of the store or a mismatched hash; AppError "bad-input" when an s3:// location has no matching setting, "not-found" when a data-folder file is gone
 */
export async function localContentFile(sha256: string, location: string, env: Record<string, string | undefined> = process.env): Promise<string> {
  const object = parseObjectLocation(location);
  if (!object) {
    const file = path.join(dataDir(), location);
    if (!fs.existsSync(file)) throw new AppError("not-found", `Kept content ${sha256.slice(0, 12)}… is not at ${file}`, { file });
    return file;
  }
  const copy = contentFilePath(sha256);
  if (fs.existsSync(copy) && hashFile(copy) === sha256) return copy;
  const settings = objectStoreSettings(env);
  if (!settings) {
    throw new ObjectStoreError(`${location} was kept in an object store, but ${SETTING.url} is not set; set the object store's settings to read it`, SETTING.url, object.key);
  }
  if (settings.bucket !== object.bucket) {
    throw new ObjectStoreError(`${location} was kept in bucket ${object.bucket}, but ${SETTING.bucket} is ${settings.bucket}`, SETTING.bucket, object.key);
  }
  return s3StoreFor(settings).fetch(sha256, object.key);
}
