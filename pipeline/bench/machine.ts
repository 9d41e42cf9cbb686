/**
 * The machine a figure was measured on: cores, CPU model, vector instruction sets and the load
 * average (other work on a shared machine skews every speed figure, so each figure states it).
 */
import fs from "node:fs";
import os from "node:os";

export interface MachineDescription {
  /** Cores this process may use (os.availableParallelism). */
  cores: number;
  /** The CPU's model name as the kernel reports it. */
  cpuModel: string;
  /** The vector instruction sets among the CPU's flags (SSE, AVX, FMA, NEON/ASIMD, SVE, AMX), in the kernel's order. */
  vectorFlags: string[];
  /** Memory, GB (10^9 bytes). */
  memoryGB: number;
  /** The one-, five- and fifteen-minute load averages when described. */
  loadAverage: [number, number, number];
}

/** Flags naming vector instruction sets: x86 SSE*, SSSE3, AVX*, FMA, F16C, AMX*; Arm NEON, ASIMD*, SVE*. */
const VECTOR_FLAG = /^(sse\d?(_\d)?|ssse3|sse4[a_]?\d?|avx[\w]*|fma4?|f16c|amx[\w]*|neon|asimd[\w]*|sve[\w]*)$/;

/**
 * The model name and vector flags of the first processor in /proc/cpuinfo text (x86: "model name"
 * and "flags"; Arm: "CPU part"/"Processor" and "Features"). Unknown fields give "" and [].
 */
export function parseCpuInfo(text: string): { model: string; vectorFlags: string[] } {
  const field = (...names: string[]) => {
    for (const name of names) {
      const m = new RegExp(`^${name}\\s*:\\s*(.*)$`, "m").exec(text);
      if (m) return m[1].trim();
    }
    return "";
  };
  const flags = field("flags", "Features").split(/\s+/).filter(Boolean);
  return { model: field("model name", "Processor", "Hardware", "CPU part"), vectorFlags: flags.filter((f) => VECTOR_FLAG.test(f)) };
}

/** This machine, now. */
export function describeMachine(): MachineDescription {
  let info = { model: "", vectorFlags: [] as string[] };
  try {
    info = parseCpuInfo(fs.readFileSync("/proc/cpuinfo", "utf8"));
  } catch {
    // not Linux: the model from Node, no flags
  }
  const [one, five, fifteen] = os.loadavg();
  return {
    cores: os.availableParallelism?.() ?? os.cpus().length,
    cpuModel: info.model || os.cpus()[0]?.model || "unknown",
    vectorFlags: info.vectorFlags,
    memoryGB: os.totalmem() / 1e9,
    loadAverage: [one, five, fifteen],
  };
}

/** One line: "2 cores, AMD EPYC, 25 GB; vector: sse ... avx2 ...; load average 1.0 1.6 2.1". */
export function formatMachine(m: MachineDescription): string {
  const load = m.loadAverage.map((x) => x.toFixed(2)).join(" ");
  return `${m.cores} cores, ${m.cpuModel}, ${m.memoryGB.toFixed(0)} GB; vector: ${m.vectorFlags.join(" ") || "none reported"}; load average ${load}`;
}
