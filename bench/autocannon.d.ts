// autocannon ships no types; the benchmarks use only this much of it.
declare module 'autocannon' {
  interface Result {
    requests: { average: number };
    latency: { p50: number; p99: number; average: number };
    non2xx: number;
    '2xx': number;
    '3xx': number;
    '5xx': number;
    errors: number;
    timeouts: number;
  }
  interface Request {
    method?: string;
    path?: string;
    headers?: Record<string, string>;
    body?: string;
    setupRequest?: (req: Request) => Request;
  }
  function autocannon(
    opts: { url: string; connections: number; duration?: number; amount?: number; method?: string; headers?: Record<string, string>; body?: string; requests?: Request[] },
    cb: (err: Error | null, result: Result) => void,
  ): void;
  namespace autocannon {
    export type { Result };
  }
  export default autocannon;
}
