import { defineConfig } from '@playwright/test';

// End-to-end tests drive the real renderer and engine through the web shell in Debian's
// Chromium (no browser downloads).
export default defineConfig({
  testDir: '.',
  testMatch: /.*\.spec\.ts/,
  outputDir: '../../test-output/e2e/artifacts',
  timeout: 120_000,
  workers: 1,
  reporter: [['list'], ['json', { outputFile: '../../test-output/e2e/results.json' }]],
  use: {
    viewport: { width: 1360, height: 860 },
    launchOptions: {
      executablePath: process.env.CHROMIUM_PATH ?? '/usr/bin/chromium',
      args: ['--no-sandbox', '--disable-gpu', '--disable-background-networking', '--disable-component-update', '--disable-sync', '--no-first-run'],
    },
    trace: 'retain-on-failure',
  },
});
