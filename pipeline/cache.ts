/**
 * Cache keys. A step's result is identified by the step id and version, its complete validated
 * parameters and the artifact hashes of the inputs it read:
 *
 *   key = sha256(canonicalJson({ step, version, params, inputs: { slot: artifact hash } }))
 *
 * Any run step that succeeded with the same key and whose output artifacts are all still on disk
 * can stand in for computing the step again. The formula is pinned by a test
 * (tests/pipeline/engine/cache.test.ts): changing it would make every earlier result unreachable.
 */
import type { Db } from "../db/client";
import { findCachedStep } from "../db/queries/runs";
import type { RunStepRecord } from "../db/queries/run-records";
import { canonicalJson } from "./artifact-codec";
import { hasArtifact } from "./artifact-store";
import { sha256Hex } from "./hash";

/** The cache key of a step run with these parameters on these inputs (slot → artifact hash). */
export function stepCacheKey(step: { id: string; version: number }, params: Record<string, unknown>, inputs: Record<string, string>): string {
  return sha256Hex(canonicalJson({ step: step.id, version: step.version, params, inputs }));
}

/** A succeeded run step with this key whose outputs are all present, with the step that computed them. */
export function findReusableResult(db: Db, cacheKey: string): (RunStepRecord & { sourceId: number }) | null {
  const found = findCachedStep(db, cacheKey).find((c) =>
    Object.values(JSON.parse(c.outputsJson) as Record<string, string>).every((h) => hasArtifact(h)),
  );
  return found ? { ...found, sourceId: found.cacheSourceStepId ?? found.id } : null;
}
