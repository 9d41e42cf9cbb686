import Link from "next/link";

export default function Forbidden() {
  return (
    <main className="mx-auto max-w-lg px-5 py-16">
      <h1>Not allowed for your role</h1>
      <p className="mt-2 text-ink-soft">This page needs a permission your role does not hold. Ask an administrator if you need it.</p>
      <Link href="/runs" className="btn mt-6">Back to runs</Link>
    </main>
  );
}
