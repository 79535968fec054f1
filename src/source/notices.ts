/**
 * Where the back ends send a line a person waiting at a terminal should see (for example
 * that the embedded database is being created, which takes seconds). Silent by default; the
 * command line points it at stderr.
 */
let sink: (message: string) => void = () => undefined;

/** Sets where notices go (the CLI passes a stderr writer). */
export function setNoticeSink(next: (message: string) => void): void {
  sink = next;
}

/** Sends one notice. */
export function notice(message: string): void {
  sink(message);
}
