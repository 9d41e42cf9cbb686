/** Runs `fn`, which must throw, and returns what it threw (typed as the caller expects). */
export function catchError<E = Error>(fn: () => unknown): E {
  try {
    fn();
  } catch (e) {
    return e as E;
  }
  throw new Error("expected an error");
}
