import { describe, expect, it } from "vitest";
import { describeParams, getStep, listSteps } from "../../../pipeline/registry";

const SIGNAL_STEPS = ["trace-edit", "time-window", "frequency-filter", "first-arrivals", "mute", "gain", "line-source", "spectra"];

describe("signal steps in the registry", () => {
  it("are listed in pipeline order after vertical-stack", () => {
    const ids = listSteps().map((s) => s.id);
    const at = SIGNAL_STEPS.map((id) => ids.indexOf(id));
    expect(at.every((i) => i > ids.indexOf("vertical-stack"))).toBe(true);
    expect([...at].sort((a, b) => a - b)).toEqual(at);
  });

  it.each(SIGNAL_STEPS)("%s: every parameter has a default and a description (units where it has one)", (id) => {
    const docs = describeParams(getStep(id));
    expect(docs.length).toBeGreaterThan(0);
    for (const d of docs) {
      expect(d.description.length, `${id}.${d.name}`).toBeGreaterThan(10);
      expect(d.optional, `${id}.${d.name}`).toBe(true);
      expect("default" in d, `${id}.${d.name}`).toBe(true);
      // A name ending in a unit says it in the description too.
      const unit = /Ms$/.test(d.name) ? "ms" : /Hz$/.test(d.name) ? "Hz" : /Mps$/.test(d.name) ? "m/s" : null;
      if (unit) expect(d.description, `${id}.${d.name}`).toContain(unit);
    }
  });
});
