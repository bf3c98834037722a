// "Start from an image…" through the web shell in Chromium: drop a PNG the demo generator made
// from a seed nobody picked, watch the search (progress and a best-so-far image), cancel, run
// again to the end, read the verdict with reference / match / difference side by side, pin the
// result in the project and move a slider on it. Screenshots land in test-output/screens/.
import { test, expect, type Page } from '@playwright/test';
import { mkdirSync, mkdtempSync, readFileSync, readdirSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { spawnSync } from 'node:child_process';
import { startShell } from './shell';

const root = join(import.meta.dirname, '..', '..');
const shots = join(root, 'test-output', 'screens');
let shell: Awaited<ReturnType<typeof startShell>>;
let target: Buffer;

test.beforeAll(async () => {
  mkdirSync(shots, { recursive: true });
  const out = mkdtempSync(join(tmpdir(), 'plumbline-e2e-locate-'));
  const r = spawnSync(process.execPath, [join(root, 'app', 'cli', 'bin.js'), 'sample', '--seeds', '731003', '--out', out], { encoding: 'utf8' });
  if (r.status !== 0) throw new Error(r.stderr);
  target = readFileSync(join(out, readdirSync(out).find((f) => f.endsWith('.png'))!));
  shell = await startShell();
});
test.afterAll(() => shell?.stop());

async function dropFile(page: Page, selector: string, name: string, bytes: Buffer) {
  const transfer = await page.evaluateHandle(({ name, data }) => {
    const dt = new DataTransfer();
    dt.items.add(new File([new Uint8Array(data)], name, { type: 'image/png' }));
    return dt;
  }, { name, data: [...bytes] });
  await page.dispatchEvent(selector, 'dragover', { dataTransfer: transfer });
  await page.dispatchEvent(selector, 'drop', { dataTransfer: transfer });
}

test('drop an image, watch, cancel, run to the end, pin, move a slider on it', async ({ page }) => {
  test.setTimeout(300_000);
  const errors: string[] = [];
  page.on('pageerror', (e) => errors.push(e.message));
  const projectDir = join(mkdtempSync(join(tmpdir(), 'plumbline-e2e-')), 'heroes');
  await page.goto(shell.url);
  await expect(page.getByTestId('engine-state')).toHaveText('engine ready', { timeout: 30_000 });
  await expect(page.getByRole('slider', { name: 'turn' })).toBeVisible({ timeout: 30_000 });
  await page.getByRole('button', { name: 'New project…' }).click();
  await page.getByLabel('Path').fill(projectDir);
  await page.getByRole('button', { name: 'Create', exact: true }).click();
  await expect(page.getByText('◆ heroes')).toBeVisible();

  await page.getByRole('button', { name: 'Start from an image…' }).click();
  const dialog = page.getByRole('dialog');
  await expect(dialog.getByRole('note')).toContainText('consent');
  await dropFile(page, '[aria-label="Drop a PNG or JPEG here"]', 'hero_crest.png', target);
  await expect(dialog.getByText('hero_crest.png')).toBeVisible();

  // First run: watch progress and the best so far, then cancel.
  await dialog.getByLabel('Evaluation budget').fill('3000');
  await dialog.getByRole('button', { name: 'Find in generator' }).click();
  await expect(page.getByTestId('locate-best')).toBeVisible({ timeout: 60_000 });
  await expect(page.getByTestId('locate-progress')).toContainText(/[1-9]\d* \/ 3000 evaluations/);
  await page.screenshot({ path: join(shots, 'locate-progress.png') });
  await dialog.getByRole('button', { name: 'Cancel' }).click();
  await expect(dialog.getByText('Cancelled.')).toBeVisible({ timeout: 30_000 });

  // Second run to the end (a smaller budget keeps the test short).
  await dialog.getByLabel('Evaluation budget').fill('900');
  await dialog.getByRole('button', { name: 'Run again' }).click();
  await expect(page.getByTestId('locate-verdict')).toBeVisible({ timeout: 200_000 });
  await expect(page.getByTestId('locate-verdict')).toContainText(/SSIM \d\.\d{3}, mean ΔE00 \d+\.\d{2}/);
  await expect(dialog.getByRole('img', { name: 'Reference' })).toBeVisible();
  await expect(dialog.getByRole('img', { name: 'Match' })).toBeVisible();
  await expect(dialog.getByRole('img', { name: /Difference/ })).toBeVisible();
  await page.screenshot({ path: join(shots, 'locate-result.png') });

  // Pin, and the workbench shows the reference in place of a seed.
  await expect(dialog.getByLabel('Reference name')).toHaveValue('hero_crest');
  await dialog.getByRole('button', { name: 'Pin as reference' }).click();
  await expect(page.getByRole('dialog')).toHaveCount(0);
  await expect(page.getByTestId('current-reference')).toHaveText('hero_crest');
  await expect(page.getByRole('option', { name: /hero_crest/ })).toHaveAttribute('aria-selected', 'true');
  expect(readdirSync(join(projectDir, 'references')).sort()).toEqual(['hero_crest.json', 'hero_crest.npy']);

  // Move a slider: the preview repaints from the reference's latent.
  const canvas = page.getByTestId('preview');
  const before = Number(await canvas.getAttribute('data-paints'));
  await page.getByRole('slider', { name: 'turn' }).fill('1.5');
  await expect.poll(async () => Number(await canvas.getAttribute('data-paints')), { timeout: 20_000 }).toBeGreaterThan(before);
  await expect(page.getByTestId('current-reference')).toHaveText('hero_crest');
  await page.screenshot({ path: join(shots, 'locate-pinned-slider.png') });

  // The Audit screen offers the project's references as a reference set beside the random probes:
  // one random probe plus the reference make the two an audit needs, and the report names it.
  await page.getByRole('button', { name: 'Audit', exact: true }).click();
  const set = page.getByTestId('audit-references');
  await expect(set).toContainText('Reference set');
  const box = set.getByRole('checkbox', { name: /hero_crest/ });
  await expect(box).not.toBeChecked();
  await page.getByLabel('Probe count').fill('1');
  await expect(page.getByTestId('probes-error')).toContainText('at least 2 probes in all');
  await box.check();
  await expect(page.getByTestId('probes-error')).toHaveCount(0);
  await page.screenshot({ path: join(shots, 'locate-audit-reference-set.png') });

  // The Variant sets screen renders the reference beside the seeds (issue 12 part 4), and the
  // manifest names its latent and image by SHA-256.
  await page.getByRole('button', { name: 'Variant sets', exact: true }).click();
  const refs = page.getByTestId('variant-references');
  await refs.getByRole('checkbox', { name: /hero_crest/ }).check();
  await page.getByLabel('Setting name').fill('turned');
  await page.getByRole('button', { name: 'Add current sliders as a setting' }).click();
  await page.getByLabel('Variant seeds').fill('5');
  const out = join(projectDir, 'renders', 'heroes');
  await page.getByLabel('Output folder').fill(out);
  await page.getByRole('button', { name: 'Render variant set' }).click();
  // turn was never signed off: forced with a reason, as the use rules require.
  await expect(page.getByTestId('variant-error')).toContainText('turn is not approved');
  await page.getByLabel('Reason to force the variant set').fill('look-development on the hero piece');
  await page.getByRole('button', { name: 'Force with this reason' }).click();
  // Two settings (the screen's unedited "base" and "turned") × (seed 5 and the reference).
  await expect(page.getByRole('status').filter({ hasText: '4 rendered, 0 kept' })).toBeVisible({ timeout: 60_000 });
  for (const setting of ['base', 'turned']) expect(readdirSync(join(out, setting)).sort()).toEqual(['reference-hero_crest.png', 'seed-000005.png']);
  const manifest = JSON.parse(readFileSync(join(out, 'manifest.json'), 'utf8'));
  const pinned = JSON.parse(readFileSync(join(projectDir, 'references', 'hero_crest.json'), 'utf8'));
  expect(JSON.stringify(manifest)).toContain(pinned.image.sha256);
  await page.screenshot({ path: join(shots, 'locate-variant-reference.png') });
  // The choice is kept with the project's variant settings across a reload.
  await page.reload();
  await expect(page.getByTestId('engine-state')).toHaveText('engine ready', { timeout: 30_000 });
  await page.getByRole('button', { name: 'Variant sets', exact: true }).click();
  await expect(page.getByTestId('variant-references').getByRole('checkbox', { name: /hero_crest/ })).toBeChecked({ timeout: 30_000 });
  expect(errors).toEqual([]);
});

test('the budget is checked beside its field and a bad one is never sent; the file chooser is themed and keyboard reachable', async ({ page }) => {
  const errors: string[] = [];
  page.on('pageerror', (e) => errors.push(e.message));
  const requests: string[] = [];
  page.on('websocket', (ws) => ws.on('framesent', (f) => requests.push(String(f.payload))));
  await page.goto(shell.url);
  await expect(page.getByTestId('engine-state')).toHaveText('engine ready', { timeout: 30_000 });
  await page.getByRole('button', { name: 'Start from an image…' }).click();
  const dialog = page.getByRole('dialog');
  // The file input is reached with the keyboard (it is visually hidden; its themed label stands for it).
  const fileInput = dialog.getByLabel('Reference image file');
  await fileInput.focus();
  await expect(fileInput).toBeFocused();
  const chooser = dialog.locator('label.choose');
  await expect(chooser).toHaveText('Choose an image…');
  const bg = await chooser.evaluate((el) => getComputedStyle(el).backgroundColor);
  expect(bg).not.toBe('rgb(239, 239, 239)'); // not the light native button
  expect(await fileInput.evaluate((el) => el.getBoundingClientRect().width)).toBeLessThanOrEqual(1);
  await fileInput.setInputFiles({ name: 'hero_crest.png', mimeType: 'image/png', buffer: target });
  await expect(dialog.getByText('hero_crest.png')).toBeVisible();
  await expect(chooser).toHaveText('Choose another image…');

  const budget = dialog.getByLabel('Evaluation budget');
  const find = dialog.getByRole('button', { name: 'Find in generator' });
  const message = page.getByTestId('budget-error');
  for (const [typed, says] of [['-5', 'from 50 to 1,000,000'], ['0', 'from 50 to 1,000,000'], ['49', 'from 50 to 1,000,000'], ['1e9', 'from 50 to 1,000,000'], ['12.5', 'whole number'], ['abc', 'whole number'], ['', 'whole number']] as const) {
    await budget.fill(typed);
    await expect(message, typed).toContainText(says);
    await expect(budget).toHaveAttribute('aria-invalid', 'true');
    await expect(find, typed).toBeDisabled();
  }
  // Beside the field: directly below it.
  const [f, m] = [await budget.boundingBox(), await message.boundingBox()];
  expect(m!.y - (f!.y + f!.height)).toBeLessThan(24);
  await page.screenshot({ path: join(shots, 'locate-budget-invalid.png') });
  expect(requests.some((r) => r.includes('engine.hello'))).toBe(true); // the frames are seen…
  expect(requests.filter((r) => r.includes('locate.run'))).toEqual([]); // …and no search was asked for
  await budget.fill('50');
  await expect(message).toHaveCount(0);
  await expect(find).toBeEnabled();
  await page.screenshot({ path: join(shots, 'locate-dialog.png') });
  expect(errors).toEqual([]);
});
