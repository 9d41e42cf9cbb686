/**
 * The web server's notice sender: every few seconds it hands the outbox to the engine's sender
 * (pipeline/notice-sender.ts). Started once per server process from instrumentation.ts (no
 * "server-only" import: the instrumentation layer is not a server-component layer); does
 * nothing without a mail server (TRACEWRIGHT_SMTP_HOST).
 */
import { getDb } from "@/db/client";
import { deliverNotices, smtpSettings } from "@/pipeline/notice-sender";

/** Interval between passes, ms (TRACEWRIGHT_NOTICE_INTERVAL_MS, default 5 s). */
export function noticeIntervalMs(): number {
  const v = Number(process.env.TRACEWRIGHT_NOTICE_INTERVAL_MS ?? 5000);
  return Number.isFinite(v) && v >= 500 ? v : 5000;
}

let timer: NodeJS.Timeout | undefined;

/** Starts the periodic sender in this process (idempotent). */
export function startNoticeDelivery(): void {
  if (timer || !smtpSettings()) return;
  let busy = false;
  timer = setInterval(() => {
    if (busy) return;
    busy = true;
    deliverNotices(getDb())
      .then((r) => {
        if (r.failed) console.error(`[mail] ${r.failed} notice(s) not sent; retried on the next pass`);
      })
      .catch((err) => console.error("[mail] notice delivery failed:", err))
      .finally(() => {
        busy = false;
      });
  }, noticeIntervalMs());
  timer.unref();
}
