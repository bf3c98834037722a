// The farm setting in the app (web shell): connect to a private redis-server on 127.0.0.1 with a
// worker, render a variant set on it, see the worker's figures; the password is never shown.
import { test, expect } from '@playwright/test';
import { join } from 'node:path';
import { mkdtempSync, readdirSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { startShell } from './shell.ts';
import { redisMissing, startRedis } from '../helpers/redis.ts';
import { startWorker } from '../helpers/farm.ts';

const shots = join(import.meta.dirname, '..', '..', 'test-output', 'screens');

test('variant set on a farm from the app, with per-worker figures', async ({ page }) => {
  test.skip(!!redisMissing(), redisMissing() ?? '');
  test.setTimeout(180_000);
  const redis = await startRedis();
  const worker = await startWorker(`redis://127.0.0.1:${redis.port}`, 'render-01', [], { PLUMBLINE_FARM_PASSWORD: redis.password });
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
    await page.getByLabel('Variant seeds').fill('0-15');
    const out = join(mkdtempSync(join(tmpdir(), 'plumbline-farm-e2e-')), 'set');
    await page.getByLabel('Output folder').fill(out);
    await page.getByRole('button', { name: 'Render variant set' }).click();
    await expect(page.getByRole('status').filter({ hasText: '16 rendered, 0 kept' })).toBeVisible({ timeout: 120_000 });
    await page.getByRole('button', { name: 'Refresh' }).click();
    // The worker delivered the units: its count and rate show in the table.
    await expect(page.getByRole('table', { name: 'Farm workers' }).getByRole('row', { name: /render-01/ })).toContainText(/render-01\s*1\s*[0-9a-f]{12}\s*[\d.]+\s*1\s*idle/, { timeout: 15_000 });
    expect(readdirSync(join(out, 'base')).length).toBe(16);
    await expect(page.locator('body')).not.toContainText(redis.password);
    await page.screenshot({ path: join(shots, 'farm-variants.png') });
  } finally {
    shell.stop();
    await worker.kill();
    await redis.stop();
  }
});
