/** The part of autocannon 9's programmatic API the load figure uses (scripts/load-figure.ts; see its README). */
declare module "autocannon" {
  import type { EventEmitter } from "node:events";

  export interface Client extends EventEmitter {
    setHeaders(headers: Record<string, string>): void;
    /** Replaces the requests this connection sends in turn (per connection: autocannon clones the options for each). */
    setRequests(requests: Array<{ method?: string; path?: string; headers?: Record<string, string>; body?: string }>): void;
  }

  export interface Histogram {
    average: number;
    mean: number;
    stddev: number;
    min: number;
    max: number;
    total: number;
    p50: number;
    p90: number;
    p97_5: number;
    p99: number;
  }

  export interface Options {
    url: string;
    connections?: number;
    duration?: number;
    /** Seconds to wait for a response before counting a timeout. */
    timeout?: number;
    method?: string;
    headers?: Record<string, string>;
    setupClient?: (client: Client) => void;
  }

  export interface Result {
    requests: Histogram;
    latency: Histogram;
    throughput: Histogram;
    errors: number;
    timeouts: number;
    non2xx: number;
    duration: number;
    "1xx": number;
    "2xx": number;
    "3xx": number;
    "4xx": number;
    "5xx": number;
  }

  export interface Instance extends EventEmitter {
    on(event: "response", listener: (client: Client, statusCode: number, resBytes: number, responseTime: number) => void): this;
    on(event: "reqError", listener: (err: Error) => void): this;
    on(event: "done", listener: (result: Result) => void): this;
    stop(): void;
  }

  function autocannon(opts: Options, callback: (err: Error | null, result: Result) => void): Instance;
  export default autocannon;
}
