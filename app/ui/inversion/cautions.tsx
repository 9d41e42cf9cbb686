import { INVERTED_MODEL_CAUTION_HEADING, INVERTED_MODEL_CAUTIONS } from "@/pipeline/report/cautions";

/** The cautions beside every inverted model (wording from the project's field notes, "Cautions"; the client report prints the same). */
export function InversionCautions() {
  return (
    <aside className="rounded-md border border-warn/40 bg-warn-soft px-3 py-2 text-sm" aria-label="Cautions for an inverted model" data-testid="inversion-cautions">
      <p className="font-medium text-warn">{INVERTED_MODEL_CAUTION_HEADING}</p>
      <ul className="mt-1 list-disc space-y-0.5 pl-5 text-ink-soft">
        {INVERTED_MODEL_CAUTIONS.map((c) => (
          <li key={c}>{c}</li>
        ))}
      </ul>
    </aside>
  );
}
