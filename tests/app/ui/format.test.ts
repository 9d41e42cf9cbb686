/**
 * Display formatting: rounded numbers with units, readable names with the unit read from the
 * house naming rule (units in the name: lowCutHz, smoothingM), round ticks. Expected strings
 * worked by hand; tick steps 1-2-5 × 10^k ("nice numbers", common practice).
 */
import { describe, expect, it } from "vitest";
import { formatNumber, formatReadable, formatSettingValue, readableName } from "@/app/ui/format";
import { niceTicks, tickLabel } from "@/app/ui/charts/ticks";
import { statusWord, STATUS_WORDS } from "@/app/ui/status-words";
import { RUN_STATUSES, STEP_STATUSES } from "@/db/schema";

describe("formatNumber", () => {
  it("rounds long floats to four significant digits", () => {
    expect(formatNumber(2.0825629373499543)).toBe("2.083");
    expect(formatNumber(199.21875, "Hz")).toBe("199.2 Hz");
    expect(formatNumber(658.9042952151964)).toBe("658.9");
    expect(formatNumber(8)).toBe("8");
  });
});

describe("readableName", () => {
  it("turns camelCase keys into words and reads the unit from the suffix", () => {
    expect(readableName("lowCutHz")).toEqual({ label: "Low cut (Hz)", words: "Low cut", unit: "Hz" });
    expect(readableName("positionToleranceM")).toMatchObject({ words: "Position tolerance", unit: "m" });
    expect(readableName("agcWindowMs")).toMatchObject({ words: "AGC window", unit: "ms" });
    expect(readableName("velocityMps")).toMatchObject({ unit: "m/s" });
    expect(readableName("measure")).toMatchObject({ words: "Measure", unit: null });
  });
});

describe("formatSettingValue", () => {
  it("says a sample interval in milliseconds with sensible rounding", () => {
    expect(formatSettingValue(0.00008333333333333333, readableName("dtS").unit)).toBe("0.08333 ms");
  });
  it("writes unset, yes/no and lists in words", () => {
    expect(formatSettingValue(null, "ms")).toBe("not set");
    expect(formatSettingValue(true, null)).toBe("yes");
    expect(formatSettingValue([50, 100, 150], "Hz")).toBe("50, 100, 150 Hz");
  });
  it("shows nested settings without raw JSON", () => {
    const text = formatReadable({ depthM: 20, fromSpread: true, spacingM: 0.25 });
    expect(text).toBe("depth 20 m · from spread yes · spacing 0.25 m");
    expect(text).not.toMatch(/[{}"]/);
  });
});

describe("niceTicks", () => {
  it("gives round ticks without float noise", () => {
    expect(niceTicks(0, 199.21875, 5)).toEqual([0, 50, 100, 150]);
    expect(niceTicks(0.1, 0.7, 6)).toEqual([0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7]);
    expect(tickLabel(199.21875)).toBe("199.2");
  });
});

describe("state vocabulary", () => {
  it("has one display word for every run and step state the database knows", () => {
    for (const s of [...RUN_STATUSES, ...STEP_STATUSES]) expect(statusWord(s)).toBe(STATUS_WORDS[s]);
    expect(statusWord("succeeded")).toBe("Succeeded");
    expect(statusWord("cancelled")).toBe("Cancelled");
  });
});
