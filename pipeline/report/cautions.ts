/**
 * The cautions that go with an inverted model wherever it leaves the tool: the same wording the
 * control room shows beside inverted models (app/ui/inversion/cautions.tsx), from the project's
 * field notes ("Cautions").
 */
export const INVERTED_MODEL_CAUTION_HEADING = "An inverted model: read it with care";

export const INVERTED_MODEL_CAUTIONS: readonly string[] = [
  "It is one model of many that fit the data about as well, not the ground itself; it also depends on the starting model and the stages chosen.",
  "Resolution falls with depth and towards the ends of the profile, where fewer waves pass.",
  "It must not be the sole basis for excavation, construction or safety decisions.",
  "Ground truth (trenches, boreholes, probes) and a licensed engineer or the local codes govern.",
];
