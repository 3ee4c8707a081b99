import type { Db } from '../store/db.ts';

export interface RunAnnouncement {
  gaugeId: string;
  runId: string;
  issueTime: string;
}

/**
 * New runs are announced through PostgreSQL LISTEN/NOTIFY, so every service instance hears of
 * runs stored by any instance; this process then tells its server-sent-event clients.
 */
export class ForecastEvents {
  private listeners = new Set<(a: RunAnnouncement) => void>();
  private stop: (() => Promise<void>) | null = null;

  async start(db: Db): Promise<void> {
    this.stop = await db.listen('forecast_runs', (payload) => {
      let a: RunAnnouncement;
      try {
        a = JSON.parse(payload);
      } catch {
        return;
      }
      for (const fn of this.listeners) fn(a);
    });
  }

  subscribe(fn: (a: RunAnnouncement) => void): () => void {
    this.listeners.add(fn);
    return () => this.listeners.delete(fn);
  }

  get subscribers(): number {
    return this.listeners.size;
  }

  async close(): Promise<void> {
    await this.stop?.();
    this.listeners.clear();
  }
}
