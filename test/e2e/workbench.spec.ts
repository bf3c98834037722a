// The first slice as a user meets it: open the app on the demo generator, pick a seed, move a
// slider, see the preview and the readout change, undo back to the exact pixels.
import { test, expect, type Page } from '@playwright/test';
import { createHash } from 'node:crypto';
import { mkdirSync } from 'node:fs';
import { join } from 'node:path';
import { startShell } from './shell';

const shots = join(import.meta.dirname, '..', '..', 'test-output', 'screens');
let shell: Awaited<ReturnType<typeof startShell>>;

test.beforeAll(async () => {
  mkdirSync(shots, { recursive: true });
  shell = await startShell();
});
test.afterAll(() => shell?.stop());

async function previewHash(page: Page): Promise<string> {
  const data = await page.getByTestId('preview').evaluate((c: HTMLCanvasElement) => {
    const ctx = c.getContext('2d')!;
    return Array.from(ctx.getImageData(0, 0, c.width, c.height).data);
  });
  return createHash('sha256').update(Uint8Array.from(data)).digest('hex');
}

async function settledHash(page: Page): Promise<string> {
  // The preview is repainted asynchronously; wait until two reads agree.
  let last = '';
  for (let i = 0; i < 50; i++) {
    await page.waitForTimeout(60);
    const h = await previewHash(page);
    if (h === last) return h;
    last = h;
  }
  return last;
}

test('pick a seed, move a slider, undo restores the exact pixels', async ({ page }) => {
  const errors: string[] = [];
  page.on('pageerror', (e) => errors.push(e.message));
  await page.goto(shell.url);
  await expect(page.getByText('Tidebound sigils (demo)')).toBeVisible();
  await expect(page.getByTestId('engine-state')).toHaveText('engine ready');
  await expect(page.getByRole('option', { name: 'Seed 5' })).toBeVisible();

  await page.getByRole('option', { name: 'Seed 5' }).click();
  await expect(page.getByTestId('current-seed')).toHaveText('5');
  const original = await settledHash(page);

  const slider = page.getByRole('slider', { name: 'crest_size' });
  await expect(slider).toBeVisible();
  await slider.fill('2');
  await expect(page.getByTestId('readout-crest_size')).toHaveText('+2.00 σ');
  await expect.poll(() => previewHash(page)).not.toBe(original);
  const edited = await settledHash(page);
  expect(edited).not.toBe(original);

  // Keyboard: one step right on the focused slider.
  await slider.focus();
  await page.keyboard.press('ArrowRight');
  await expect(page.getByTestId('readout-crest_size')).toHaveText('+2.05 σ');

  await page.screenshot({ path: join(shots, 'workbench.png') });

  await page.keyboard.press('Control+z');
  await expect(page.getByTestId('readout-crest_size')).toHaveText('+2.00 σ');
  await page.keyboard.press('Control+z');
  await expect(page.getByTestId('readout-crest_size')).toHaveText('0.00 σ');
  await expect.poll(() => previewHash(page)).toBe(original);
  expect(await settledHash(page)).toBe(original);

  await page.keyboard.press('Control+Shift+z');
  await expect(page.getByTestId('readout-crest_size')).toHaveText('+2.00 σ');
  await expect.poll(() => previewHash(page)).toBe(edited);
  expect(errors).toEqual([]);
});

test('sliders combine on one seed and compare shows the original', async ({ page }) => {
  await page.goto(shell.url);
  await expect(page.getByTestId('engine-state')).toHaveText('engine ready');
  await expect(page.getByRole('slider', { name: 'hue_shift' })).toBeVisible();
  const base = await settledHash(page);
  await page.getByRole('slider', { name: 'hue_shift' }).fill('1.5');
  await page.getByRole('slider', { name: 'gem_grow' }).fill('2');
  await expect(page.getByTestId('readout-gem_grow')).toHaveText('+2.00 σ');
  await expect.poll(() => previewHash(page)).not.toBe(base);
  const both = await settledHash(page);
  await page.getByRole('button', { name: 'Compare with original' }).click();
  await expect.poll(() => previewHash(page)).toBe(base);
  await page.getByRole('button', { name: 'Showing original' }).click();
  await expect.poll(() => previewHash(page)).toBe(both);
  await page.getByRole('button', { name: 'Reset all' }).click();
  await expect(page.getByTestId('readout-hue_shift')).toHaveText('0.00 σ');
  await expect.poll(() => previewHash(page)).toBe(base);
  await page.screenshot({ path: join(shots, 'workbench-reset.png') });
});

test('a bad path shows a clear error banner and the work stays', async ({ page }) => {
  await page.goto(shell.url);
  await expect(page.getByTestId('engine-state')).toHaveText('engine ready');
  await page.getByRole('slider', { name: 'turn' }).fill('1');
  await page.getByRole('button', { name: 'Open generator…' }).click();
  await page.getByLabel('Path').fill('/nonexistent/model.onnx');
  await page.getByRole('button', { name: 'Open', exact: true }).click();
  await expect(page.getByRole('alert')).toContainText('/nonexistent/model.onnx: synthesis model not found');
  await expect(page.getByTestId('readout-turn')).toHaveText('+1.00 σ');
  await expect(page.getByText('Tidebound sigils (demo)')).toBeVisible();
  await page.screenshot({ path: join(shots, 'error-banner.png') });
});
