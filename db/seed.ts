/**
 * Demo accounts: one per role, people of the invented Corvell Ground Imaging scenario.
 * The passwords are for the local demo only and are printed by `npm run demo`.
 */
import type { Db } from "./client";
import type { Role } from "./schema";
import { createUser, getUserByEmail } from "./queries/users";

export interface DemoAccount {
  email: string;
  password: string;
  role: Role;
  name: string;
}

/** The demo accounts (invented people). */
export const DEMO_ACCOUNTS: readonly DemoAccount[] = [
  { email: "ines.varga@corvell.example", password: "demo-admin-quillmoor", role: "admin", name: "Ines Varga" },
  { email: "rosa.okafor-lind@corvell.example", password: "demo-lead-quillmoor", role: "lead", name: "Rosa Okafor-Lind" },
  { email: "tam.whitcombe@corvell.example", password: "demo-processor-quillmoor", role: "processor", name: "Tam Whitcombe" },
  { email: "odile.brasher@corvell.example", password: "demo-auditor-quillmoor", role: "auditor", name: "Odile Brasher" },
];

/**
 * Creates the demo accounts that do not exist yet (matched by email; existing accounts keep
 * their password and role). Returns every demo account with its password, for printing.
 */
export function seedDemoUsers(db: Db): Array<{ email: string; password: string; role: Role; name: string }> {
  for (const account of DEMO_ACCOUNTS) {
    if (!getUserByEmail(db, account.email)) createUser(db, account);
  }
  return DEMO_ACCOUNTS.map((a) => ({ ...a }));
}
