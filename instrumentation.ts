/**
 * Next.js start-up hook of the server process: starts the mail notice sender and the clean-up of
 * abandoned upload transfers (Node runtime only, never during `next build`).
 */
export async function register(): Promise<void> {
  if (process.env.NEXT_RUNTIME !== "nodejs" || process.env.NEXT_PHASE === "phase-production-build") return;
  const { startNoticeDelivery } = await import("./app/lib/notice-delivery");
  startNoticeDelivery();
  const { startUploadCleanup } = await import("./app/lib/upload-cleanup-schedule");
  startUploadCleanup();
}
