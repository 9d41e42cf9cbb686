import NextAuth from "next-auth";
import { getAuthOptions } from "@/app/lib/auth-options";

export const dynamic = "force-dynamic";
export const runtime = "nodejs";

type Context = { params: Promise<{ nextauth: string[] }> };

async function handler(req: Request, context: Context) {
  return NextAuth(getAuthOptions())(req as never, context as never) as Promise<Response>;
}

export { handler as GET, handler as POST };
