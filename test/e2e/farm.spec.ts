// The farm setting in the app (web shell): connect to a private redis-server on 127.0.0.1 with a
// two workers, render a variant set on it, see each worker's figures while it runs; the password
// is never shown.
import { test, expect } from '@playwright/test';
import { join } from 'node:path';
import { mkdtempSync, readdirSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { startShell } from './shell.ts';
import { redisMissing, startRedis } from '../helpers/redis.ts';
import { startWorker } from '../helpers/farm.ts';

const shots = join(import.meta.dirname, '..', '..', 'test-output', 'screens');

test('variant set on a farm from the app, with per-worker progress while it runs', async ({ page }) => {
  test.skip(!!redisMissing(), redisMissing() ?? '');
  test.setTimeout(180_000);
  const redis = await startRedis();
  const worker = await startWorker(`redis://127.0.0.1:${redis.port}`, 'render-01', [], { PLUMBLINE_FARM_PASSWORD: redis.password });
  const second = await startWorker(`redis://127.0.0.1:${redis.port}`, 'render-02', [], { PLUMBLINE_FARM_PASSWORD: redis.password });
  const shell = await startShell();
  try {
    await page.goto(shell.url);
    await expect(page.getByTestId('engine-state')).toHaveText('engine ready', { timeout: 30_000 });
    await expect(page.getByRole('slider', { name: 'turn' })).toBeVisible({ timeout: 60_000 });
    await page.keyboard.press('Alt+5');
    await page.getByText('Render farm: this machine only').click();
    await page.getByLabel('Farm address').fill(`redis://127.0.0.1:${redis.port}`);
    await page.getByLabel('Farm password').fill(redis.password);
    await page.getByRole('button', { name: 'Connect' }).click();
    await expect(page.getByRole('table', { name: 'Farm workers' })).toContainText('render-01', { timeout: 30_000 });
    await expect(page.getByRole('table', { name: 'Farm workers' })).toContainText('render-02');
    // Enough seeds (24 units of 64) that the job is still running when the per-worker figures show.
    await page.getByLabel('Variant seeds').fill('0-1535');
    const out = join(mkdtempSync(join(tmpdir(), 'plumbline-farm-e2e-')), 'set');
    await page.getByLabel('Output folder').fill(out);
    await page.getByRole('button', { name: 'Render variant set' }).click();
    // While the job runs: each worker's units, images and images/s beside the job's progress.
    const perWorker = page.getByRole('list', { name: 'Farm workers on this job' });
    await expect(perWorker).toContainText(/render-0[12] \d+ units? · \d+ images · [\d.]+ img\/s/, { timeout: 60_000 });
    await page.screenshot({ path: join(shots, 'farm-progress.png') });
    await expect(page.getByRole('status').filter({ hasText: '1536 rendered, 0 kept' })).toBeVisible({ timeout: 150_000 });
    await page.getByRole('button', { name: 'Refresh' }).click();
    // The workers delivered the units between them: counts and rates show in the table.
    const rows = page.getByRole('table', { name: 'Farm workers' });
    await expect(rows.getByRole('row', { name: /render-01/ })).toContainText(/render-01\s*1\s*[0-9a-f]{12}\s*[\d.]+\s*\d+\s*idle/, { timeout: 15_000 });
    const units = await Promise.all(['render-01', 'render-02'].map(async (name) => Number((await rows.getByRole('row', { name: new RegExp(name) }).locator('td').nth(4).textContent()) ?? NaN)));
    expect(units[0] + units[1]).toBe(24);
    expect(readdirSync(join(out, 'base')).length).toBe(1536);
    await expect(page.locator('body')).not.toContainText(redis.password);
    await page.screenshot({ path: join(shots, 'farm-variants.png') });
  } finally {
    shell.stop();
    await worker.kill();
    await second.kill();
    await redis.stop();
  }
});
