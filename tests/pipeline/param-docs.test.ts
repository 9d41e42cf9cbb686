/**
 * The settings documentation the control room's forms are generated from (describeParams in
 * pipeline/registry.ts), read from the steps' zod schemas through zod's JSON Schema output
 * (JSON Schema 2020-12: prefixItems for tuples, oneOf for unions, exclusiveMinimum as a number).
 * Each expectation restates what the step's own schema declares.
 */
import { describe, expect, it } from "vitest";
import { describeParams, getStep, type ParamDoc } from "../../pipeline/registry";

const doc = (step: string, name: string): ParamDoc => {
  const d = describeParams(getStep(step)).find((p) => p.name === name);
  if (!d) throw new Error(`${step} has no setting ${name}`);
  return d;
};

describe("describeParams down to nested fields", () => {
  it("an object setting lists its fields (build-model grid)", () => {
    const grid = doc("build-model", "grid");
    expect(grid.type).toBe("object");
    const spacing = grid.fields!.find((f) => f.name === "spacingM")!;
    expect(spacing).toMatchObject({ type: "number", minimum: 0, exclusiveMinimum: true, default: 0.25 });
  });

  it("a list of objects with a list of integers inside (trace-edit kill: channels 1-based)", () => {
    const kill = doc("trace-edit", "kill");
    const channels = kill.items!.find((f) => f.name === "channels")!;
    expect(channels.type).toBe("array");
    expect(channels.minItems).toBe(1);
    expect(channels.element).toMatchObject({ type: "integer", minimum: 0, exclusiveMinimum: true });
  });

  it("a list of objects of several kinds, told apart by their kind (build-model shapes)", () => {
    const shapes = doc("build-model", "shapes");
    expect(shapes.variants!.map((v) => [v.key, v.tag])).toEqual([["kind", "rectangle"], ["kind", "ellipse"], ["kind", "polygon"]]);
    const polygon = shapes.variants![2].fields.find((f) => f.name === "points")!;
    expect(polygon.minItems).toBe(3);
    expect(polygon.element!.tuple!.map((t) => t.type)).toEqual(["number", "number"]);
  });

  it("numeric choices keep their numbers; a nullable number keeps its limit", () => {
    expect(doc("frequency-filter", "mainsHz").choiceValues).toEqual([0, 50, 60]);
    expect(doc("spectra", "maxFrequencyHz")).toMatchObject({ type: "number", nullable: true, minimum: 0, exclusiveMinimum: true, default: null });
  });
});
