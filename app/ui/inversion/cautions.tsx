/** The cautions beside every inverted model (wording from the project's field notes, "Cautions"). */
export function InversionCautions() {
  return (
    <aside className="rounded-md border border-warn/40 bg-warn-soft px-3 py-2 text-sm" aria-label="Cautions for an inverted model" data-testid="inversion-cautions">
      <p className="font-medium text-warn">An inverted model: read it with care</p>
      <ul className="mt-1 list-disc space-y-0.5 pl-5 text-ink-soft">
        <li>It is one model of many that fit the data about as well, not the ground itself; it also depends on the starting model and the stages chosen.</li>
        <li>Resolution falls with depth and towards the ends of the profile, where fewer waves pass.</li>
        <li>It must not be the sole basis for excavation, construction or safety decisions.</li>
        <li>Ground truth (trenches, boreholes, probes) and a licensed engineer or the local codes govern.</li>
      </ul>
    </aside>
  );
}
