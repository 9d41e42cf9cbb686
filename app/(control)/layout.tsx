import Link from "next/link";
import { pageUser } from "@/app/lib/page-user";
import { can, ROLE_LABELS } from "@/app/lib/permissions";
import { MainNav } from "@/app/ui/shell/main-nav";
import { SignOutButton } from "@/app/ui/auth/sign-out-button";

export const dynamic = "force-dynamic";

export default async function ControlLayout({ children }: { children: React.ReactNode }) {
  const user = await pageUser();
  const links = [
    { href: "/runs", label: "Runs" },
    { href: "/surveys", label: "Surveys" },
    ...(can(user.role, "runs.start") ? [{ href: "/runs/new", label: "Start a run" }] : []),
    { href: "/pipelines", label: "Pipelines" },
    ...(can(user.role, "uploads.send") ? [{ href: "/uploads", label: "Upload field files" }] : []),
    { href: "/field-checks", label: "Field checks" },
    { href: "/compare", label: "Compare settings" },
    { href: "/workers", label: "Workers" },
    ...(can(user.role, "audit.read") ? [{ href: "/audit", label: "Audit trail" }] : []),
    ...(can(user.role, "users.manage") ? [{ href: "/people", label: "People" }] : []),
    ...(can(user.role, "audit.read") ? [{ href: "/outbox", label: "Outbox" }] : []),
  ];
  return (
    <div className="min-h-screen">
      <header className="border-b border-line bg-panel print:hidden">
        <div className="mx-auto flex min-h-14 max-w-[1400px] flex-wrap items-center gap-x-6 gap-y-2 px-5 py-2">
          <Link href="/runs" className="flex items-center gap-2 font-semibold">
            {/* eslint-disable-next-line @next/next/no-img-element */}
            <img src="/icon.svg" alt="" width={24} height={24} />
            Tracewright
          </Link>
          <MainNav links={links} />
          <div className="ml-auto flex items-center gap-3 text-sm">
            <span data-testid="signed-in-as">
              <Link href="/account" className="hover:underline" data-testid="account-link">{user.name}</Link> <span className="rounded bg-accent-soft px-1.5 py-0.5 text-xs text-accent">{ROLE_LABELS[user.role]}</span>
            </span>
            <SignOutButton />
          </div>
        </div>
      </header>
      <main className="mx-auto max-w-[1400px] px-5 py-6">{children}</main>
    </div>
  );
}
