"use client";

import { useState } from "react";
import { useRouter } from "next/navigation";
import { ApiError, postJson } from "@/app/lib/queries";
import { formatTime, shortHash } from "@/app/ui/format";

interface Props {
  surveys: Array<{ id: number; name: string }>;
  datasets: Array<{ id: number; surveyId: number | null; name: string; fileCount: number; contentHash: string; createdAt: number }>;
  versions: Array<{ id: number; name: string; version: number; surveyId: number | null; createdBy: string; createdAt: number }>;
  /** A version chosen beforehand (the pipeline page's "Run this version"). */
  initialVersionId?: number;
}

/** Survey → dataset → pipeline version, then queue the run through the engine. */
export function StartRunForm({ surveys, datasets, versions, initialVersionId }: Props) {
  const router = useRouter();
  const initialSurvey = versions.find((v) => v.id === initialVersionId)?.surveyId;
  const [surveyId, setSurveyId] = useState<number | null>(initialSurvey ?? surveys[0]?.id ?? null);
  const ds = datasets.filter((d) => surveyId === null || d.surveyId === surveyId);
  const pv = versions.filter((v) => surveyId === null || v.surveyId === surveyId || v.surveyId === null);
  const [datasetId, setDatasetId] = useState<number | null>(ds[0]?.id ?? null);
  const [versionId, setVersionId] = useState<number | null>(pv.find((v) => v.id === initialVersionId)?.id ?? pv[0]?.id ?? null);
  const [error, setError] = useState<string | null>(null);
  const [busy, setBusy] = useState(false);

  async function start(e: React.FormEvent) {
    e.preventDefault();
    if (!datasetId || !versionId) return setError("Choose a dataset and a pipeline version.");
    setBusy(true);
    setError(null);
    try {
      const res = await postJson<{ runId: number }>("/api/runs", { datasetId, pipelineVersionId: versionId });
      router.push(`/runs/${res.runId}`);
    } catch (err) {
      setError(err instanceof ApiError ? err.message : String(err));
      setBusy(false);
    }
  }

  return (
    <form onSubmit={start} className="card space-y-4 p-5" aria-label="Start a run">
      <label className="label">Survey
        <select className="field mt-1" value={surveyId ?? ""} onChange={(e) => { const id = e.target.value ? Number(e.target.value) : null; setSurveyId(id); setDatasetId(datasets.find((d) => id === null || d.surveyId === id)?.id ?? null); }}>
          <option value="">Any survey</option>
          {surveys.map((s) => <option key={s.id} value={s.id}>{s.name}</option>)}
        </select>
      </label>
      <label className="label">Dataset (a folder of field files at one moment)
        <select className="field mt-1" value={datasetId ?? ""} onChange={(e) => setDatasetId(Number(e.target.value))} data-testid="dataset">
          {ds.length === 0 ? <option value="">No datasets recorded for this survey</option> : null}
          {ds.map((d) => <option key={d.id} value={d.id}>{d.name} · {d.fileCount} files · {shortHash(d.contentHash)} · {formatTime(d.createdAt)}</option>)}
        </select>
      </label>
      <label className="label">Pipeline version
        <select className="field mt-1" value={versionId ?? ""} onChange={(e) => setVersionId(Number(e.target.value))} data-testid="pipeline-version">
          {pv.length === 0 ? <option value="">No pipeline versions recorded</option> : null}
          {pv.map((v) => <option key={v.id} value={v.id}>{v.name} v{v.version} · saved by {v.createdBy}, {formatTime(v.createdAt)}</option>)}
        </select>
      </label>
      {error ? <p role="alert" className="rounded-md bg-bad-soft px-3 py-2 text-sm text-bad">{error}</p> : null}
      <button type="submit" className="btn-primary" disabled={busy || !datasetId || !versionId}>{busy ? "Starting…" : "Start the run"}</button>
    </form>
  );
}
