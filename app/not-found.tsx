import Link from "next/link";

export default function NotFound() {
  return (
    <main className="mx-auto max-w-lg px-5 py-16">
      <h1>Nothing here</h1>
      <p className="mt-2 text-ink-soft">The run, step or page you asked for does not exist.</p>
      <Link href="/runs" className="btn mt-6">Back to runs</Link>
    </main>
  );
}
