// A studio that cannot be misused (issue 11), end to end through the web shell in Chromium:
// projects only where they belong (checked on disk), a second tab read-only, bad input stopped
// where it is typed, approvals the audits do not support refused without a written reason and
// recorded with one, variant sets refusing a rejected direction, and everything back after a
// reload. Screenshots of each changed screen at 1280 and 1600 px go to test-output/screens/.
import { test, expect, type Page } from '@playwright/test';
import { existsSync, mkdirSync, mkdtempSync, readdirSync, readFileSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { startShell } from './shell';

const shots = join(import.meta.dirname, '..', '..', 'test-output', 'screens');
let shell: Awaited<ReturnType<typeof startShell>>;
/** A root for the web shell's folder browser, with a small studio tree in it. */
const browseRoot = mkdtempSync(join(tmpdir(), 'plumbline-studio-root-'));

test.beforeAll(async () => {
  mkdirSync(shots, { recursive: true });
  for (const d of ['emblems/audits', 'emblems/directions', 'new-season']) mkdirSync(join(browseRoot, d), { recursive: true });
  writeFileSync(join(browseRoot, 'emblems', 'project.json'), '{}');
  shell = await startShell({ PLUMBLINE_BROWSE_ROOTS: browseRoot });
});
test.afterAll(() => shell?.stop());

async function ready(page: Page) {
  await expect(page.getByTestId('engine-state')).toHaveText('engine ready', { timeout: 30_000 });
  await expect(page.getByRole('slider', { name: 'turn' })).toBeVisible({ timeout: 30_000 });
}

/** The same screen at the two widths the issue names. */
async function shoot(page: Page, name: string) {
  for (const width of [1280, 1600]) {
    await page.setViewportSize({ width, height: 860 });
    await page.screenshot({ path: join(shots, `${name}-${width}.png`), fullPage: true });
  }
  await page.setViewportSize({ width: 1360, height: 860 });
}

async function newProject(page: Page, path: string) {
  await page.getByRole('button', { name: 'New project…' }).click();
  await page.getByLabel('Path', { exact: true }).fill(path);
  await page.getByRole('button', { name: 'Create', exact: true }).click();
}

async function audit(page: Page, names: string[], probes: number) {
  await page.keyboard.press('Alt+3');
  await page.getByRole('button', { name: 'None' }).click();
  for (const n of names) await page.getByRole('checkbox', { name: n, exact: true }).check();
  await page.getByLabel('Probe count').fill(String(probes));
  await page.getByRole('button', { name: 'Run audit' }).click();
}

test('a new project only in a new or empty folder: a non-empty and a system folder are refused with nothing written', async ({ page }) => {
  await page.goto(shell.url);
  await ready(page);
  const full = mkdtempSync(join(tmpdir(), 'plumbline-full-'));
  writeFileSync(join(full, 'brief.txt'), 'client brief');
  await newProject(page, full);
  // Refused inside the dialog, beside the path; the dialog stays open with the path typed.
  const dialog = page.getByRole('dialog', { name: 'Create a project' });
  const refusal = dialog.getByTestId('path-refused');
  const create = dialog.getByRole('button', { name: 'Create', exact: true });
  await expect(refusal).toContainText(`cannot create a project here: ${full} is not empty`);
  await expect(dialog.getByLabel('Path', { exact: true })).toHaveValue(full);
  await expect(create).toBeDisabled(); // the same path again would only be refused again
  await expect(page.locator('.banner')).toHaveCount(0);
  expect(readdirSync(full)).toEqual(['brief.txt']);

  const etcBefore = readdirSync('/etc').sort();
  await dialog.getByLabel('Path', { exact: true }).fill('/etc');
  await expect(refusal).toHaveCount(0);
  await create.click();
  await expect(refusal).toContainText('/etc is a system folder');
  await expect(dialog.getByLabel('Path', { exact: true })).toHaveValue('/etc');
  await shoot(page, 'safeguards-new-project-refused');
  await dialog.getByLabel('Path', { exact: true }).fill('/etc/plumbline-emblems');
  await create.click();
  await expect(refusal).toContainText('inside the system folder /etc');
  expect(readdirSync('/etc').sort()).toEqual(etcBefore);
  expect(existsSync('/etc/project.json')).toBe(false);
  expect(existsSync('/etc/plumbline-emblems')).toBe(false);
  await dialog.getByRole('button', { name: 'Cancel' }).click();
  await expect(dialog).toHaveCount(0);
  await expect(page.getByText(/◆ /)).toHaveCount(0);
});

test('a negative probe count is stopped beside the field, and nothing waits forever', async ({ page }) => {
  await page.goto(shell.url);
  await ready(page);
  await page.keyboard.press('Alt+3');
  await page.getByRole('checkbox', { name: 'turn', exact: true }).check();
  const field = page.getByLabel('Probe count');
  await field.fill('-5');
  const message = page.getByTestId('probes-error');
  await expect(message).toHaveText(/Probes cannot be negative \(0–100,000\)/);
  await expect(field).toHaveAttribute('aria-invalid', 'true');
  // The message sits beside the field: directly below it, not in a banner somewhere else.
  const [f, m] = [await field.boundingBox(), await message.boundingBox()];
  expect(m!.y - (f!.y + f!.height)).toBeLessThan(24);
  expect(Math.abs(m!.x - f!.x)).toBeLessThan(40);
  await expect(page.getByRole('button', { name: 'Run audit' })).toBeDisabled();
  await expect(page.getByRole('progressbar', { name: 'Audit progress' })).toHaveCount(0);
  await field.fill('1');
  await expect(message).toContainText('at least 2 probes in all');
  await shoot(page, 'safeguards-audit-probes');
  // A long audit ends its wait the moment Cancel is pressed.
  await field.fill('5000');
  await expect(message).toHaveCount(0);
  await page.getByRole('button', { name: 'Run audit' }).click();
  await expect(page.getByRole('progressbar', { name: 'Audit progress' })).toBeVisible();
  await page.getByRole('button', { name: 'Cancel audit' }).click();
  await expect(page.getByRole('progressbar', { name: 'Audit progress' })).toHaveCount(0, { timeout: 2_000 });
  await expect(page.getByRole('button', { name: 'Run audit' })).toBeEnabled();
});

test('sign-off gates, variant rules, a second tab read-only, and everything back after a reload', async ({ page, context }) => {
  test.setTimeout(1_200_000); // two audits and a repair on a shared 2-core machine
  const errors: string[] = [];
  page.on('pageerror', (e) => errors.push(e.message));
  const projectDir = join(mkdtempSync(join(tmpdir(), 'plumbline-gates-')), 'crests');
  await page.goto(shell.url);
  await ready(page);
  await newProject(page, projectDir);
  await expect(page.getByText('◆ crests')).toBeVisible();
  const log = () => (existsSync(join(projectDir, 'review-log.jsonl')) ? readFileSync(join(projectDir, 'review-log.jsonl'), 'utf8').trim().split('\n').map((l) => JSON.parse(l)) : []);

  // Unaudited: no plain Approve; the override needs a written reason before it can be recorded.
  await page.keyboard.press('Alt+4');
  await page.getByLabel('Reviewer name').fill('Ines Moreau');
  await expect(page.getByTestId('gate-crest_size')).toHaveText('not audited');
  await expect(page.getByRole('button', { name: 'Approve crest_size', exact: true })).toHaveCount(0);
  await expect(page.getByRole('button', { name: 'Back to draft crest_size' })).toHaveCount(0); // already draft: no no-op
  await page.getByRole('button', { name: 'Approve crest_size with a reason' }).click();
  const record = page.getByRole('button', { name: 'Record override approval of crest_size' });
  await expect(record).toBeDisabled();
  await page.getByLabel('Override reason for crest_size').fill('ok');
  await expect(record).toBeDisabled();
  expect(log()).toEqual([]);
  await page.getByLabel('Override reason for crest_size').fill('needed for the trailer; audit follows next sprint');
  await record.click();
  await expect(page.getByTestId('status-crest_size')).toHaveText('Approved');
  await expect(page.getByTestId('override-crest_size')).toContainText('never audited');
  expect(log()).toMatchObject([{ direction: 'crest_size', status: 'approved', reviewer: 'Ines Moreau', override: 'needed for the trailer; audit follows next sprint', gate: 'never audited' }]);

  // Audit: outline_bold fails; approving it is refused without a reason and recorded with one.
  await audit(page, ['outline_bold', 'turn'], 32);
  await expect(page.getByTestId('verdict-outline_bold')).toHaveText('Fail', { timeout: 400_000 });
  await expect(page.getByTestId('verdict-turn')).toHaveText('Pass');
  await shoot(page, 'safeguards-audit');
  await page.getByRole('button', { name: /Enlarge seed \d+ of outline_bold/ }).first().click();
  await expect(page.getByRole('dialog', { name: /outline_bold, enlarged/ })).toBeVisible();
  const big = await page.getByRole('img', { name: /full size/ }).first().boundingBox();
  expect(big!.width).toBeGreaterThanOrEqual(256);
  await shoot(page, 'safeguards-worst-probe-enlarged');
  await page.getByRole('button', { name: 'Close', exact: true }).click();

  await page.keyboard.press('Alt+4');
  await expect(page.getByTestId('gate-outline_bold')).toHaveText('audit failed');
  await expect(page.getByTestId('gate-turn')).toHaveText('audit passed');
  await expect(page.getByRole('button', { name: 'Approve turn', exact: true })).toBeVisible();
  await expect(page.getByRole('button', { name: 'Approve outline_bold', exact: true })).toHaveCount(0);
  await page.getByRole('button', { name: 'Approve outline_bold with a reason' }).click();
  await expect(page.getByRole('button', { name: 'Record override approval of outline_bold' })).toBeDisabled();
  await page.getByLabel('Override reason for outline_bold').fill('backdrop shift accepted by the art director');
  await page.getByRole('button', { name: 'Record override approval of outline_bold' }).click();
  await expect(page.getByTestId('status-outline_bold')).toHaveText('Approved');
  expect(log().at(-1)).toMatchObject({ direction: 'outline_bold', status: 'approved', override: 'backdrop shift accepted by the art director' });
  expect(log().at(-1).gate).toMatch(/its last audit failed/);
  // A passing one is approved plainly; rejecting turn afterwards is allowed, doing it twice is not offered.
  await page.getByRole('button', { name: 'Reject turn' }).click();
  await expect(page.getByTestId('status-turn')).toHaveText('Rejected');
  await expect(page.getByRole('button', { name: 'Reject turn' })).toHaveCount(0);
  await shoot(page, 'safeguards-signoff');

  // Repair outline_bold: the re-audit adds results, turn's stays.
  await page.keyboard.press('Alt+3');
  await page.getByRole('button', { name: 'Show outline_bold' }).click();
  await page.getByRole('checkbox', { name: 'backdrop', exact: true }).check();
  await page.getByRole('button', { name: 'Repair and re-audit' }).click();
  await expect(page.getByTestId('verdict-outline_bold_repaired')).toHaveText('Pass', { timeout: 400_000 });
  await expect(page.getByTestId('verdict-turn')).toHaveText('Pass');
  await expect(page.getByRole('group', { name: 'Same probes before and after repair of outline_bold' })).toBeVisible({ timeout: 60_000 });
  await expect(page.getByRole('img', { name: /with outline_bold_repaired/ })).toHaveCount(await page.getByRole('img', { name: /with outline_bold$/ }).count());
  await shoot(page, 'safeguards-repair');

  // Variant set with the rejected direction: refused beside the button, nothing rendered.
  await page.keyboard.press('Alt+1');
  await page.getByRole('slider', { name: 'turn' }).fill('1');
  await page.keyboard.press('Alt+5');
  await page.getByLabel('Setting name').fill('turned');
  await page.getByRole('button', { name: 'Add current sliders as a setting' }).click();
  await page.getByLabel('Variant seeds').fill('0-x');
  await expect(page.getByText("'0-x' is not a seed or a range like 0-7")).toBeVisible();
  await page.getByLabel('Variant seeds').fill('0-1');
  const out = join(projectDir, 'renders', 'turned');
  await page.getByLabel('Output folder').fill(out);
  await page.getByRole('button', { name: 'Render variant set' }).click();
  await expect(page.getByTestId('variant-error')).toContainText('turn was rejected at sign-off');
  expect(existsSync(out)).toBe(false);
  await shoot(page, 'safeguards-variants-refused');
  await page.getByLabel('Reason to force the variant set').fill('comparison sheet for the review meeting');
  await page.getByRole('button', { name: 'Force with this reason' }).click();
  // Two settings (base, turned) × two seeds.
  await expect(page.getByRole('status').filter({ hasText: '4 rendered' })).toBeVisible({ timeout: 60_000 });
  const manifest = JSON.parse(readFileSync(join(out, 'manifest.json'), 'utf8'));
  expect(manifest.forced.reason).toBe('comparison sheet for the review meeting');
  expect(manifest.forced.settings[0]).toMatchObject({ setting: 'turned', direction: 'turn', kind: 'rejected' });
  await page.keyboard.press('Alt+1');
  await page.getByRole('button', { name: 'Reset turn' }).click();
  await page.getByRole('slider', { name: 'crest_size' }).fill('0.5');
  await page.getByRole('button', { name: 'Pin to probes' }).click();

  // Discovery candidates: kept in the project until discarded.
  await page.keyboard.press('Alt+2');
  await page.getByLabel('Components').fill('2');
  await page.getByRole('button', { name: 'Find candidates' }).click();
  await expect(page.getByRole('group', { name: /Strip of sefa_1/ })).toBeVisible({ timeout: 120_000 });
  expect(readdirSync(join(projectDir, 'candidates')).filter((f) => f.endsWith('.npy')).length).toBe(2);

  // A second tab on the same project opens read-only and says so.
  const second = await context.newPage();
  await second.goto(shell.url);
  await ready(second);
  await expect(second.getByText('◆ crests')).toBeVisible({ timeout: 30_000 });
  await expect(second.getByTestId('read-only')).toBeVisible();
  await expect(second.getByRole('status').or(second.getByRole('alert')).filter({ hasText: 'Opened read-only: another window has this project open' })).toBeVisible();
  await second.keyboard.press('Alt+4');
  await expect(second.getByText('Read-only: another window holds this project.')).toBeVisible();
  await expect(second.getByRole('button', { name: /^Approve / })).toHaveCount(0);
  await shoot(second, 'safeguards-second-tab-read-only');
  await second.close();
  // A copy of this tab (window.open of its address: the browser copies its sessionStorage, as
  // "Duplicate tab" does) is another window too, not a second writer.
  const [copy] = await Promise.all([context.waitForEvent('page'), page.evaluate(() => void window.open(location.href))]);
  await ready(copy);
  await expect(copy.getByText('◆ crests')).toBeVisible({ timeout: 30_000 });
  await expect(copy.getByTestId('read-only')).toBeVisible();
  await copy.close();

  // Reload: audits (with the repair), variant settings, sliders, ψ and the pinned seed come back.
  await page.waitForTimeout(1_500); // autosave settles within a second
  await page.reload();
  await ready(page);
  await expect(page.getByText('◆ crests')).toBeVisible({ timeout: 60_000 });
  await expect(page.getByTestId('read-only')).toHaveCount(0);
  await expect(page.getByTestId('readout-crest_size')).toHaveText('+0.50 σ');
  await expect(page.getByRole('button', { name: 'Pinned to probes' })).toBeVisible();
  await page.keyboard.press('Alt+3');
  await expect(page.getByTestId('verdict-outline_bold')).toHaveText('Fail');
  await expect(page.getByTestId('verdict-turn')).toHaveText('Pass');
  await expect(page.getByTestId('verdict-outline_bold_repaired')).toHaveText('Pass');
  await page.keyboard.press('Alt+5');
  await expect(page.getByRole('list', { name: 'Settings' })).toContainText('turn +1');
  await expect(page.getByLabel('Variant seeds')).toHaveValue('0-1');
  await expect(page.getByLabel('Output folder')).toHaveValue(out);
  expect(readdirSync(join(projectDir, 'audits')).length).toBe(2);
  // The candidates came back; discarding them all asks first, then removes them from the project.
  await page.keyboard.press('Alt+2');
  await expect(page.getByRole('group', { name: /Strip of sefa_0/ })).toBeVisible();
  await expect(page.getByRole('group', { name: /Strip of sefa_1/ })).toBeVisible();
  await page.getByRole('button', { name: 'Discard all…' }).click();
  await expect(page.getByText('Discard all 2? They cannot be brought back without searching again.')).toBeVisible();
  await expect(page.getByRole('group', { name: /Strip of sefa_0/ })).toBeVisible();
  await page.getByRole('button', { name: 'Discard all', exact: true }).click();
  await expect(page.getByRole('group', { name: /Strip of sefa_/ })).toHaveCount(0);
  expect(readdirSync(join(projectDir, 'candidates'))).toEqual([]);
  expect(errors).toEqual([]);
});

test('screens at 1280 and 1600 px: workbench with the seed grid, discover, shortcuts', async ({ page }) => {
  await page.goto(shell.url);
  await ready(page);
  // The seed grid's third column is inside the shelf at 1280 px.
  await page.setViewportSize({ width: 1280, height: 800 });
  const shelf = await page.getByRole('listbox', { name: 'Seed grid' }).boundingBox();
  const third = await page.getByRole('option', { name: 'Seed 2', exact: true }).boundingBox();
  expect(third!.x + third!.width).toBeLessThanOrEqual(shelf!.x + shelf!.width);
  await shoot(page, 'safeguards-workbench');
  await page.keyboard.press('Alt+2');
  await page.getByRole('button', { name: 'Help: Closed-form factorization' }).click();
  await expect(page.getByRole('note', { name: 'Closed-form factorization' })).toBeVisible();
  await page.getByLabel('Components').fill('0');
  await expect(page.getByText('Components must be from 1 to 64.')).toBeVisible();
  await shoot(page, 'safeguards-discover');
  // The New project dialog browses folders on the workstation (home and chosen roots only).
  await page.getByRole('button', { name: 'New project…' }).click();
  const browser = page.getByRole('group', { name: 'Folder browser' });
  await expect(browser).toBeVisible();
  await page.getByLabel('Browse root').selectOption(browseRoot);
  await browser.getByRole('button', { name: '▸ new-season' }).click();
  await expect(page.getByLabel('Path', { exact: true })).toHaveValue(join(browseRoot, 'new-season'));
  await expect(browser).toContainText('Empty folder: a good place for a new project.');
  await shoot(page, 'safeguards-open-dialog');
  await page.getByRole('button', { name: 'Cancel' }).click();
  // The variant output folder is chosen with the same browser, not typed.
  await page.keyboard.press('Alt+5');
  await page.getByRole('button', { name: 'Choose…' }).click();
  const outBrowser = page.getByRole('group', { name: 'Folder browser' });
  await page.getByLabel('Browse root').selectOption(browseRoot);
  await outBrowser.getByRole('button', { name: '▸ new-season' }).click();
  await page.getByRole('button', { name: 'Choose', exact: true }).click();
  await expect(page.getByLabel('Output folder')).toHaveValue(join(browseRoot, 'new-season'));
  await shoot(page, 'safeguards-variants-out');
  await page.keyboard.press('Alt+1');
  await page.keyboard.press('?');
  await expect(page.getByRole('dialog', { name: 'Keyboard shortcuts' })).toBeVisible();
  await shoot(page, 'safeguards-shortcuts');
});
