// autocannon ships no types; the benchmarks use only this much of it.
declare module 'autocannon' {
  interface Result {
    requests: { average: number };
    non2xx: number;
    '2xx': number;
    '3xx': number;
  }
  function autocannon(opts: { url: string; connections: number; duration: number; headers?: Record<string, string> }, cb: (err: Error | null, result: Result) => void): void;
  namespace autocannon {
    export type { Result };
  }
  export default autocannon;
}
