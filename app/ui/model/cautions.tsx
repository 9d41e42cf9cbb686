/** The cautions that go with every model or figure that leaves the tool (from the project's field notes). */
export function ModelCautions({ compact = false }: { compact?: boolean }) {
  return (
    <aside className={`rounded-md border border-warn/40 bg-warn-soft text-sm ${compact ? "px-3 py-2" : "p-4"}`} aria-label="Cautions" data-testid="model-cautions">
      <p className="font-medium text-warn">Read this model with care</p>
      <ul className="mt-1 list-disc space-y-0.5 pl-5 text-ink-soft">
        <li>It is one model that fits the data, not the only one. Resolution falls with depth and towards the ends of the profile.</li>
        <li>It must not be the sole basis for excavation, construction or safety decisions.</li>
        <li>Ground truth (trenches, boreholes, probes) and a licensed engineer or the local codes govern.</li>
      </ul>
    </aside>
  );
}
