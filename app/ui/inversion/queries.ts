/**
 * react-query option factories of the inversion view (same conventions as app/lib/queries.ts):
 * the intermediates of a step (polled while the run is live) and fields (models, gradients)
 * as binary, immutable by hash.
 */
import { queryOptions } from "@tanstack/react-query";
import { getJson, LIVE_POLL_MS } from "@/app/lib/queries";
import { decodeWire } from "@/app/lib/trace-wire";
import type { IntermediateView } from "@/app/lib/view-types";

/** Header of GET /api/artifacts/:hash/field (see app/lib/field-wire.ts). */
export interface FieldHeader {
  kind: "model" | "gradient";
  nx: number;
  nz: number;
  spacingM: number;
  originX: number;
  originZ: number;
  fields: string[];
}

export const inversionQueries = {
  intermediates: (runId: number, stepLabel: string, live: boolean) =>
    queryOptions({
      queryKey: ["intermediates", runId, stepLabel],
      queryFn: () =>
        getJson<{ runId: number; step: string; status: string; intermediates: IntermediateView[] }>(
          `/api/runs/${runId}/steps/${encodeURIComponent(stepLabel)}/intermediates`,
        ),
      refetchInterval: live ? LIVE_POLL_MS * 3 : false,
    }),
  field: (hash: string) =>
    queryOptions({
      queryKey: ["field", hash],
      queryFn: async () => {
        const res = await fetch(`/api/artifacts/${hash}/field`);
        if (!res.ok) {
          const body = (await res.json().catch(() => null)) as { error?: { message?: string } } | null;
          throw new Error(body?.error?.message ?? `Request failed (${res.status}).`);
        }
        return decodeWire<FieldHeader>(await res.arrayBuffer());
      },
      staleTime: Infinity,
    }),
};
