import { z } from 'zod';

const logLevels = ['fatal', 'error', 'warn', 'info', 'debug', 'trace', 'silent'] as const;

const ConfigSchema = z.object({
  PORT: z.coerce.number().int().min(0).max(65535).default(8080),
  HOST: z.string().min(1).default('127.0.0.1'),
  DATABASE_URL: z
    .string()
    .regex(/^postgres(ql)?:\/\//, 'must be a postgres:// or postgresql:// connection string')
    .optional(),
  DATA_DIR: z.string().min(1).default('./data'),
  LOG_LEVEL: z.enum(logLevels).default('info'),
  AUTH: z.enum(['on', 'off']).default('on'),
  BODY_LIMIT_MB: z.coerce.number().positive().max(512).default(64),
  /** Bytes of request bodies received at once, all requests together; beyond it 503 with Retry-After. */
  BODY_BUDGET_MB: z.coerce.number().positive().max(16_384).default(128),
  ATTENTION_LEVEL: z.coerce.number().min(0).max(1).default(0.3),
  MAX_TRAJECTORIES: z.coerce.number().int().min(10).max(100_000).default(5000),
  CORRECTION_QUEUE: z.coerce.number().int().min(1).max(10_000).default(32),
  WORKERS: z.coerce.number().int().min(1).max(64).default(2),
  /** A running job whose heartbeat (every 3 s) is older than this was left by a dead instance and is marked failed. */
  JOB_STALE_SECONDS: z.coerce.number().int().min(5).max(3600).default(30),
  /** Past runs a per-lead error archive needs before it serves runs (see src/core/stochastic/archive-choice.ts). */
  PER_LEAD_MIN_RUNS: z.coerce.number().int().min(1).max(1_000_000).default(300),
});

export type Config = z.infer<typeof ConfigSchema>;

export class ConfigError extends Error {}

/** Reads configuration from the environment; every bad variable is named in the message. */
export function loadConfig(env: Record<string, string | undefined> = process.env): Config {
  const picked: Record<string, string> = {};
  for (const key of Object.keys(ConfigSchema.shape)) {
    const value = env[key];
    if (value !== undefined && value !== '') picked[key] = value;
  }
  const parsed = ConfigSchema.safeParse(picked);
  if (!parsed.success) {
    const lines = parsed.error.issues.map(
      (issue) => `  ${issue.path.join('.')}=${JSON.stringify(picked[String(issue.path[0])])}: ${issue.message}`,
    );
    throw new ConfigError(`invalid configuration:\n${lines.join('\n')}`);
  }
  const config = parsed.data;
  if (config.AUTH === 'off' && !isLoopback(config.HOST)) {
    throw new ConfigError(
      `invalid configuration:\n  AUTH=off is only allowed when HOST is a loopback address (HOST=${config.HOST})`,
    );
  }
  return config;
}

export function isLoopback(host: string): boolean {
  return host === 'localhost' || host === '::1' || host === '[::1]' || /^127\.\d+\.\d+\.\d+$/.test(host);
}
