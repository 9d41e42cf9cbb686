"use client";

import Link from "next/link";
import { usePathname } from "next/navigation";

/** The top navigation; marks the section the page belongs to. */
export function MainNav({ links }: { links: Array<{ href: string; label: string }> }) {
  const pathname = usePathname();
  const active = links
    .filter((l) => pathname === l.href || pathname.startsWith(l.href + "/"))
    .sort((a, b) => b.href.length - a.href.length)[0]?.href;
  return (
    <nav aria-label="Sections" className="flex flex-wrap gap-1">
      {links.map((l) => (
        <Link
          key={l.href}
          href={l.href}
          aria-current={active === l.href ? "page" : undefined}
          className={`whitespace-nowrap rounded-md px-3 py-1.5 text-sm ${active === l.href ? "bg-accent-soft font-medium text-accent" : "text-ink-soft hover:bg-ground"}`}
        >
          {l.label}
        </Link>
      ))}
    </nav>
  );
}
