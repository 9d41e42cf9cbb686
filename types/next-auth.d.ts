import type { DefaultSession } from "next-auth";
import type { Role } from "@/db/schema";

declare module "next-auth" {
  interface User {
    role: Role;
  }
  interface Session {
    user: DefaultSession["user"] & { id: number; role: Role };
  }
}

declare module "next-auth/jwt" {
  interface JWT {
    userId?: number;
    role?: Role;
  }
}
