// The first slice as a user meets it: open the app on the demo generator, pick a seed, move a
// slider, see the preview and the readout change, undo back to the exact pixels.
import { test, expect, type Page } from '@playwright/test';
import { createHash } from 'node:crypto';
import { existsSync, mkdirSync, mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
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

test('go to seed and variant seeds are checked where they are typed; the engine never gets a seed it refuses', async ({ page }) => {
  const errors: string[] = [];
  page.on('pageerror', (e) => errors.push(e.message));
  await page.goto(shell.url);
  await expect(page.getByTestId('engine-state')).toHaveText('engine ready');
  await expect(page.getByRole('option', { name: 'Seed 5' })).toBeVisible();
  const jump = page.getByLabel('Go to seed');
  const message = page.getByTestId('jump-error');
  for (const typed of ['abc', '-1', '12.5', '4294967296', '4294967295']) {
    await jump.fill(typed);
    await expect(message, typed).toBeVisible();
    await expect(jump).toHaveAttribute('aria-invalid', 'true');
    await jump.press('Enter');
    await expect(page.getByTestId('current-seed')).toHaveText('0');
  }
  await expect(message).toContainText('Seeds go up to 4294967279');
  await page.screenshot({ path: join(shots, 'workbench-go-to-seed-invalid.png') });
  // The message sits beside the field, directly below it.
  const [f, m] = [await jump.boundingBox(), await message.boundingBox()];
  expect(m!.y - (f!.y + f!.height)).toBeLessThan(24);
  // The largest seed the app offers: its whole page renders, and the header matches the thumbnails.
  await jump.fill('4294967279');
  await expect(message).toHaveCount(0);
  await jump.press('Enter');
  await expect(page.getByTestId('current-seed')).toHaveText('4294967279');
  await expect(page.getByRole('option', { name: 'Seed 4294967279' })).toBeVisible({ timeout: 30_000 });
  await expect(page.getByRole('option', { name: 'Seed 4294967256' })).toBeVisible();
  await expect(page.getByTestId('grid-range')).toHaveText('4294967256–4294967279');
  await expect(page.getByRole('button', { name: 'Next seeds' })).toBeDisabled();
  await page.waitForTimeout(1_200); // an autosave or render refusal would have shown by now
  await expect(page.getByRole('alert')).toHaveCount(0);
  await page.screenshot({ path: join(shots, 'workbench-last-page.png') });

  // Variant sets: the same upper limit in the seeds field; a refusal no use rule made is not offered to force.
  await page.keyboard.press('Alt+5');
  // No project is open here: the screen says nothing can be checked rather than implying a check.
  await expect(page.getByTestId('variants-unchecked')).toContainText('No project is open: there is no sign-off or audited safe range to check');
  // Outputs never go into the operating system's folders.
  await page.getByLabel('Variant seeds').fill('0');
  await page.getByLabel('Output folder').fill('/etc/plumbline-variants');
  await page.getByRole('button', { name: 'Render variant set' }).click();
  await expect(page.getByTestId('variant-failure')).toContainText('inside the system folder /etc', { timeout: 30_000 });
  expect(existsSync('/etc/plumbline-variants')).toBe(false);
  await page.getByLabel('Variant seeds').fill('4294967296');
  await expect(page.getByText('seed 4294967296 is too large: seeds go up to 4294967279')).toBeVisible();
  await expect(page.getByRole('button', { name: 'Render variant set' })).toBeDisabled();
  await page.getByLabel('Variant seeds').fill('0');
  // An output "folder" inside a file cannot be written: a plain failure, nothing to force.
  const file = join(mkdtempSync(join(tmpdir(), 'plumbline-e2e-')), 'brief.txt');
  writeFileSync(file, 'client brief');
  await page.getByLabel('Output folder').fill(join(file, 'renders'));
  await page.getByRole('button', { name: 'Render variant set' }).click();
  await expect(page.getByTestId('variant-failure')).toBeVisible({ timeout: 30_000 });
  await expect(page.getByTestId('variant-error')).toHaveCount(0);
  await expect(page.getByLabel('Reason to force the variant set')).toHaveCount(0);
  await page.screenshot({ path: join(shots, 'variants-not-forceable.png') });
  expect(errors).toEqual([]);
});

test('the masthead shows a readable short form of the generator at 1280 and 1600 px, the full details in its tooltip', async ({ page }) => {
  await page.goto(shell.url);
  await expect(page.getByTestId('engine-state')).toHaveText('engine ready');
  const details = page.getByTestId('model-details');
  await expect(details).toHaveAttribute('title', /^Tidebound sigils \(demo\) — W\+ · \d+-d × \d+ layers · \d+×\d+ — fingerprint [0-9a-f]{64}$/);
  for (const width of [1280, 1600]) {
    await page.setViewportSize({ width, height: 800 });
    await expect(page.getByTestId('model-shape')).toHaveText(/^W\+ · \d+×\d+$/);
    await expect(page.getByTestId('model-fingerprint')).toHaveText(/^#[0-9a-f]{8}$/);
    // Nothing of the short form is cut: each part is whole and inside the masthead's details.
    const box = (await details.boundingBox())!;
    // The demo's name is read whole too (a longer one shortens with an ellipsis before the rest).
    expect(await details.locator('strong').evaluate((el) => el.scrollWidth <= el.clientWidth + 1), `name at ${width}`).toBe(true);
    for (const id of ['model-shape', 'model-fingerprint']) {
      const part = page.getByTestId(id);
      expect(await part.evaluate((el) => el.scrollWidth <= el.clientWidth + 1), `${id} at ${width}`).toBe(true);
      const b = (await part.boundingBox())!;
      expect(b.x + b.width, `${id} at ${width}`).toBeLessThanOrEqual(box.x + box.width + 1);
    }
    await page.screenshot({ path: join(shots, `masthead-${width}.png`), clip: { x: 0, y: 0, width, height: 90 } });
  }
});
