import { describe, expect, it } from "vitest";
import { toAppError } from "../../../pipeline/errors";
import { FdSetupError } from "../../../pipeline/kernels/fd/errors";

// The doors show "bad-input" errors as the user's to fix (exit code and HTTP status of a bad
// request); "internal" says the program failed. The solver's refusals are the user's to fix.
describe("toAppError", () => {
  it("turns the solver's grid refusal into an input error with its message and field", () => {
    const e = toAppError(new FdSetupError("Grid too coarse: spacing 0.25 m gives 3.84 points per shortest S wavelength", "spacingM"));
    expect(e.code).toBe("bad-input");
    expect(e.message).toMatch(/^Grid too coarse/);
    expect(e.details.field).toBe("spacingM");
  });

  it("recognises the refusal by name when it crossed a worker thread as a plain Error", () => {
    const cloned = Object.assign(new Error("time step too large"), { name: "FdSetupError" });
    expect(toAppError(cloned).code).toBe("bad-input");
  });

  it("keeps anything else internal", () => {
    expect(toAppError(new TypeError("x is undefined")).code).toBe("internal");
  });
});
