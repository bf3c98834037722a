// The main flow by keyboard alone: no mouse from loading the page to an approved direction.
import { test, expect, type Page } from '@playwright/test';
import { mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { startShell } from './shell';

let shell: Awaited<ReturnType<typeof startShell>>;
test.beforeAll(async () => (shell = await startShell()));
test.afterAll(() => shell?.stop());

/** Presses Tab until the focused element has this accessible name (checked from its label or text). */
async function tabTo(page: Page, name: string | RegExp, limit = 120) {
  for (let i = 0; i < limit; i++) {
    await page.keyboard.press('Tab');
    const label = await page.evaluate(() => {
      const el = document.activeElement as HTMLElement | null;
      if (!el) return '';
      return el.getAttribute('aria-label') || (el.id && document.querySelector(`label[for="${el.id}"]`)?.textContent?.trim()) || el.closest('label')?.textContent?.trim() || el.textContent?.trim() || '';
    });
    if (typeof name === 'string' ? label === name : name.test(label)) return;
  }
  throw new Error(`could not reach ${name} with Tab`);
}

test('create a project, audit, repair and approve using only the keyboard', async ({ page }) => {
  test.setTimeout(240_000);
  await page.goto(shell.url);
  await expect(page.getByTestId('engine-state')).toHaveText('engine ready', { timeout: 30_000 });
  await expect(page.getByRole('slider', { name: 'turn' })).toBeVisible();

  // A slider by keyboard: focus, nudge, undo.
  await tabTo(page, 'turn');
  await page.keyboard.press('ArrowRight');
  await expect(page.getByTestId('readout-turn')).toHaveText('+0.05 σ');
  await page.keyboard.press('Control+z');
  await expect(page.getByTestId('readout-turn')).toHaveText('0.00 σ');

  await tabTo(page, 'New project…');
  await page.keyboard.press('Enter');
  await page.keyboard.type(join(mkdtempSync(join(tmpdir(), 'plumbline-kb-')), 'kb'));
  await page.keyboard.press('Enter');
  await expect(page.getByText('◆ kb')).toBeVisible();

  await page.keyboard.press('Alt+3');
  await tabTo(page, 'None');
  await page.keyboard.press('Enter');
  await tabTo(page, 'outline_bold');
  await page.keyboard.press('Space');
  await tabTo(page, 'Probe count');
  await page.keyboard.press('Control+a');
  await page.keyboard.type('30');
  await tabTo(page, 'Run audit');
  await page.keyboard.press('Enter');
  await expect(page.getByTestId('verdict-outline_bold')).toHaveText('Fail', { timeout: 120_000 });

  await tabTo(page, 'backdrop');
  await page.keyboard.press('Space');
  await tabTo(page, 'Repair and re-audit');
  await page.keyboard.press('Enter');
  await expect(page.getByTestId('verdict-outline_bold_repaired')).toHaveText('Pass', { timeout: 180_000 });

  await page.keyboard.press('Alt+4');
  await tabTo(page, 'Reviewer name');
  await page.keyboard.type('K. Board');
  await tabTo(page, 'Approve outline_bold_repaired');
  await page.keyboard.press('Enter');
  await expect(page.getByTestId('status-outline_bold_repaired')).toHaveText('Approved');
});
