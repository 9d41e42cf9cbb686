/**
 * The checks the generated setting fields make as a person types (app/ui/rerun/setting-input.tsx),
 * on documentation made from real step schemas: limits as the zod schema states them, exclusive
 * ones (zod's .positive(), JSON Schema 2020-12 exclusiveMinimum) refusing the limit itself, and
 * null accepted only where the schema allows it. The server's check stays the pipeline-file parser;
 * these only warn early.
 */
import { describe, expect, it } from "vitest";
import { describeParams, getStep, type ParamDoc } from "@/pipeline/registry";
import { rangeText, valueProblem } from "@/app/ui/rerun/setting-input";

const doc = (step: string, name: string): ParamDoc => describeParams(getStep(step)).find((p) => p.name === name)!;

describe("setting field checks", () => {
  it("an exclusive lower limit refuses the limit itself (frequency-filter highCutHz > 0)", () => {
    const d = doc("frequency-filter", "highCutHz");
    expect(valueProblem(d, 0)).toBe("Above 0.");
    expect(valueProblem(d, -5)).toBeTruthy();
    expect(valueProblem(d, 0.001)).toBeNull();
    expect(rangeText(d)).toBe(" Above 0.");
  });

  it("an inclusive range (frequency-filter order 1 to 8, whole numbers)", () => {
    const d = doc("frequency-filter", "order");
    expect(valueProblem(d, 1)).toBeNull();
    expect(valueProblem(d, 9)).toBe("At most 8.");
    expect(valueProblem(d, 2.5)).toBe("Enter a whole number.");
    expect(rangeText(d)).toBe(" Range 1 to 8.");
  });

  it("null only where the schema allows it (spectra maxFrequencyHz may be null; highCutHz may not)", () => {
    expect(valueProblem(doc("spectra", "maxFrequencyHz"), null)).toBeNull();
    expect(valueProblem(doc("frequency-filter", "highCutHz"), null)).toBe("Enter a number.");
  });

  it("numeric choices are checked as the choices they are (mains 0, 50 or 60 Hz)", () => {
    const d = doc("frequency-filter", "mainsHz");
    expect(valueProblem(d, 50)).toBeNull();
    expect(valueProblem(d, 55)).toBe("One of 0, 50, 60.");
  });
});
