/** Datasets: a folder of field files at one moment, identified by its content hash. */
import { and, desc, eq } from "drizzle-orm";
import { writeTransaction, type Db } from "../client";
import { datasetFiles, datasets } from "../schema";

export interface FolderFile {
  name: string;
  sizeBytes: number;
  sha256: string;
}

/** Finds the dataset for this folder and content, or records a new one. */
export function ensureDataset(
  db: Db,
  d: { folderPath: string; contentHash: string; files: FolderFile[]; surveyId: number | null; profileId: number | null; name: string },
) {
  return writeTransaction(db, (tx) => {
    // Look up inside the write transaction: two processes registering the same folder at once
    // must not both insert it.
    const existing = tx
      .select()
      .from(datasets)
      .where(and(eq(datasets.folderPath, d.folderPath), eq(datasets.contentHash, d.contentHash)))
      .get();
    if (existing) return existing;
    const row = tx
      .insert(datasets)
      .values({
        folderPath: d.folderPath,
        contentHash: d.contentHash,
        fileCount: d.files.length,
        totalBytes: d.files.reduce((s, f) => s + f.sizeBytes, 0),
        surveyId: d.surveyId,
        profileId: d.profileId,
        name: d.name,
      })
      .returning()
      .get();
    for (const f of d.files) tx.insert(datasetFiles).values({ datasetId: row.id, ...f }).run();
    return row;
  });
}

export function getDataset(db: Db, id: number) {
  return db.select().from(datasets).where(eq(datasets.id, id)).get() ?? null;
}

export function listDatasetFiles(db: Db, datasetId: number) {
  return db.select().from(datasetFiles).where(eq(datasetFiles.datasetId, datasetId)).orderBy(datasetFiles.name).all();
}

export function listDatasets(db: Db, surveyId?: number) {
  return db
    .select()
    .from(datasets)
    .where(surveyId ? eq(datasets.surveyId, surveyId) : undefined)
    .orderBy(desc(datasets.id))
    .all();
}
