import fs from "node:fs";
import path from "node:path";
import { readSeg2, seg2ToGather } from "../pipeline/io/seg2";
import { staLtaPicks } from "../pipeline/kernels/pickers";
const dir = process.argv[2];
const names = process.argv.slice(3);
for (const name of names) {
  const g = seg2ToGather(readSeg2(new Uint8Array(fs.readFileSync(path.join(dir, name))), name), name, { id: name, sourceFile: name });
  const dt = g.sampleIntervalS, ns = g.sampleCount, nt = g.traces.length;
  const sx = g.traces[0].sourceX;
  const start = new Int32Array(nt), end = new Int32Array(nt);
  for (let t = 0; t < nt; t++) { const x = Math.abs(g.traces[t].receiverX - sx); start[t] = Math.round((x/2000 + 0.01)/dt); end[t] = Math.round((0.015 + x/250 + 0.01)/dt)+1; }
  const p = staLtaPicks(g.data, nt, ns, { searchStart: 0, searchEnd: ns, shortSamples: 8, longSamples: 40, perTrace: { start, end } }, 4);
  const row = [];
  for (let t = 0; t < nt; t++) { const x = g.traces[t].receiverX - sx; if (Math.abs(x) <= 10) row.push(`${x}:${(p.index[t]*dt*1000-10).toFixed(1)}`); }
  // peak amplitude in first 5 ms after 0 and noise
  console.log(name, sx, row.join(" "));
}
