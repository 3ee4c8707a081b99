import { spawn, type ChildProcess } from 'node:child_process';
import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { DataDirLockedError, openEmbedded } from '../../src/store/embedded-driver.ts';

// After a crash the lock file stays. In a container the new process is often PID 1 again, so the
// old lock names our own PID: it must be told apart from a lock this process really holds.
const dirs: string[] = [];
const children: ChildProcess[] = [];
function freshDir(): string {
  const dir = mkdtempSync(join(tmpdir(), 'sft-lock-'));
  dirs.push(dir);
  return dir;
}
afterAll(() => {
  for (const c of children) c.kill('SIGKILL');
  for (const d of dirs) rmSync(d, { recursive: true, force: true });
});

describe.skipIf(process.env.TEST_STORE === 'postgres')('the embedded store lock', () => {
  it('takes over a lock left by an earlier process that had our PID (old format: PID only)', async () => {
    const dir = freshDir();
    writeFileSync(join(dir, 'embedded.lock'), String(process.pid));
    const db = await openEmbedded(dir);
    await db.query('select 1');
    await db.close();
  });

  it('takes over a lock left by an earlier process that had our PID but started at another time', async () => {
    const dir = freshDir();
    writeFileSync(join(dir, 'embedded.lock'), JSON.stringify({ pid: process.pid, startTicks: 1, bootId: 'earlier-boot', instance: 'crashed-before' }));
    const db = await openEmbedded(dir);
    const lock = JSON.parse(readFileSync(join(dir, 'embedded.lock'), 'utf8'));
    expect(lock.pid).toBe(process.pid);
    expect(lock.instance).not.toBe('crashed-before');
    await db.close();
  });

  it('refuses a second open in the same process', async () => {
    const dir = freshDir();
    const db = await openEmbedded(dir);
    await expect(openEmbedded(dir)).rejects.toThrow(DataDirLockedError);
    await db.close();
  });

  it('refuses a lock held by another live process, and takes it over once the PID names a different process', async () => {
    const child = spawn(process.execPath, ['-e', 'setTimeout(() => {}, 60000)'], { stdio: 'ignore' });
    children.push(child);
    await new Promise((r) => child.once('spawn', r));
    const dir = freshDir();
    const path = join(dir, 'embedded.lock');
    const startTicks = Number(readFileSync(`/proc/${child.pid}/stat`, 'utf8').split(') ')[1].split(' ')[19]);
    const bootId = readFileSync('/proc/sys/kernel/random/boot_id', 'utf8').trim();
    writeFileSync(path, JSON.stringify({ pid: child.pid, startTicks, bootId, instance: 'live-one' }));
    await expect(openEmbedded(dir)).rejects.toThrow(/in use by process/);
    // The same PID, but a process that started at another time: the PID was reused, the lock is stale.
    writeFileSync(path, JSON.stringify({ pid: child.pid, startTicks: startTicks + 12345, bootId, instance: 'reused-pid' }));
    const db = await openEmbedded(dir);
    await db.close();
    child.kill('SIGKILL');
  });
});
