import { describe, expect, it } from 'vitest';
import { ConfigError, loadConfig } from '../src/config.ts';

describe('configuration from the environment', () => {
  it('has safe defaults', () => {
    const c = loadConfig({});
    expect(c).toMatchObject({ PORT: 8080, HOST: '127.0.0.1', DATA_DIR: './data', LOG_LEVEL: 'info', AUTH: 'on' });
    expect(c.DATABASE_URL).toBeUndefined();
  });

  it('names every bad variable', () => {
    try {
      loadConfig({ PORT: 'eighty', LOG_LEVEL: 'loud', DATABASE_URL: 'mysql://x' });
      expect.unreachable();
    } catch (e) {
      expect(e).toBeInstanceOf(ConfigError);
      const msg = (e as Error).message;
      expect(msg).toContain('PORT="eighty"');
      expect(msg).toContain('LOG_LEVEL="loud"');
      expect(msg).toContain('DATABASE_URL="mysql://x"');
    }
  });

  it('refuses to run without auth on a non-loopback address', () => {
    expect(() => loadConfig({ AUTH: 'off', HOST: '0.0.0.0' })).toThrow(/AUTH=off is only allowed/);
    expect(loadConfig({ AUTH: 'off', HOST: '127.0.0.1' }).AUTH).toBe('off');
  });
});
