import { modelHeading, type ModelKind } from "./model-kind";

/**
 * The cautions that go with a model or figure that leaves the tool (from the project's field
 * notes), worded for what the model is: a starting model is an assumption, an inverted model
 * one of many that fit the data.
 */
export function ModelCautions({ model, compact = false }: { model: ModelKind; compact?: boolean }) {
  return (
    <aside className={`rounded-md border border-warn/40 bg-warn-soft text-sm ${compact ? "px-3 py-2" : "p-4"}`} aria-label="Cautions" data-testid="model-cautions" data-model-kind={model.kind}>
      <p className="font-medium text-warn">Read this {model.kind === "starting" ? "starting model" : "inverted model"} with care</p>
      <ul className="mt-1 list-disc space-y-0.5 pl-5 text-ink-soft">
        {model.kind === "starting" ? (
          <>
            <li>It is the model the inversion starts from, built from the layers and settings given to the step: an assumption, not a result. It has not been fitted to the data.</li>
            <li>Use it to check the grid, the geometry and the forward modelling, not to read the ground.</li>
          </>
        ) : (
          <>
            <li>
              {modelHeading(model)}: one model that fits the data to the misfit reached, not the only one. Resolution falls with depth and towards the ends of
              the profile, and features smaller than about half a wavelength are not resolved.
            </li>
            {model.iteration !== undefined ? <li>Later iterations or stages may change it; compare it with the starting model and the misfit curve.</li> : null}
          </>
        )}
        <li>It must not be the sole basis for excavation, construction or safety decisions.</li>
        <li>Ground truth (trenches, boreholes, probes) and a licensed engineer or the local codes govern.</li>
      </ul>
    </aside>
  );
}
