/** `tracewright audit verify`: check the audit trail's hash chain from the first event to the last. */
import type { Command } from "commander";
import { verifyAuditChain } from "../../db/queries/audit-chain";
import { AppError } from "../../pipeline/errors";
import { action, openCliDb, printJson } from "../shared";

/** Parses `--expect-head <id>:<hash>` (a head kept from an earlier check). */
function parseHead(value: string): { id: number; hash: string } {
  const m = /^(\d+):([0-9a-f]{64})$/i.exec(value.trim());
  if (!m) throw new AppError("bad-input", `--expect-head must be <event id>:<64 hex digits> as printed by an earlier check, got "${value}"`, { field: "--expect-head" });
  return { id: Number(m[1]), hash: m[2].toLowerCase() };
}

export function registerAudit(program: Command): void {
  const audit = program.command("audit").description("the audit trail");
  audit
    .command("verify")
    .description("check the hash chain of the whole audit trail; names the first broken link and exits 1 when there is one")
    .option("--expect-head <id:hash>", "also check that an event kept from an earlier check still has its hash (catches a rewritten trail)")
    .option("--json", "print the verdict as JSON")
    .action(
      action(async (opts: { expectHead?: string; json?: boolean }) => {
        const expectHead = opts.expectHead ? parseHead(opts.expectHead) : undefined;
        const v = verifyAuditChain(openCliDb(), { expectHead });
        if (opts.json) printJson(v);
        else if (v.ok) {
          process.stdout.write(`audit trail intact: ${v.checked} event${v.checked === 1 ? "" : "s"} checked, every link holds\n`);
          if (v.chainStart) process.stdout.write(`events up to ${v.chainStart.sealedThroughId} were written before the chain existed and sealed at event ${v.chainStart.markerId}\n`);
          process.stdout.write(`head: ${v.headId}:${v.headHash}  (keep this; --expect-head checks it later)\n`);
        } else {
          process.stdout.write(`audit trail BROKEN at event ${v.firstBroken!.id}: ${v.firstBroken!.reason}\n${v.checked} events checked\n`);
        }
        if (!v.ok) process.exitCode = 1;
      }),
    );
}
