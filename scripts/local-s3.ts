/**
 * A local S3-compatible server for the tests and the demo: s3rver (a devDependency) on a free
 * loopback port, its objects in a temporary folder, one bucket made at start. Its access key and
 * secret are s3rver's fixed pair ("S3RVER"/"S3RVER"); a request signed with another key id is
 * refused with InvalidAccessKeyId, as S3 does.
 */
import fs from "node:fs";
import os from "node:os";
import path from "node:path";
import S3rver from "s3rver";

/** A running local S3 server. */
export interface LocalS3 {
  /** Endpoint, e.g. http://127.0.0.1:41234 */
  url: string;
  bucket: string;
  accessKeyId: string;
  secretAccessKey: string;
  /** Folder where s3rver keeps the objects (removed by stop()). */
  directory: string;
  /** The settings that point Tracewright's field-file store at this server. */
  env: Record<string, string>;
  stop(): Promise<void>;
}

/** Starts s3rver on 127.0.0.1 at a port the system picks, with `bucket` made. */
export async function startLocalS3(bucket = "field-files-test"): Promise<LocalS3> {
  const directory = fs.mkdtempSync(path.join(os.tmpdir(), "tw-s3-"));
  const server = new S3rver({ address: "127.0.0.1", port: 0, silent: true, directory, configureBuckets: [{ name: bucket, configs: [] }] });
  const address = await server.run();
  const url = `http://127.0.0.1:${address.port}`;
  const accessKeyId = "S3RVER";
  const secretAccessKey = "S3RVER";
  return {
    url,
    bucket,
    accessKeyId,
    secretAccessKey,
    directory,
    env: {
      TRACEWRIGHT_OBJECT_STORE_URL: url,
      TRACEWRIGHT_OBJECT_STORE_BUCKET: bucket,
      TRACEWRIGHT_OBJECT_STORE_ACCESS_KEY_ID: accessKeyId,
      TRACEWRIGHT_OBJECT_STORE_SECRET_ACCESS_KEY: secretAccessKey,
      TRACEWRIGHT_OBJECT_STORE_PATH_STYLE: "true",
    },
    async stop() {
      await server.close();
      fs.rmSync(directory, { recursive: true, force: true });
    },
  };
}
