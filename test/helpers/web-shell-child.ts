// Runs a web shell in its own process for tests that must see whether the shell survives:
// serves a tiny stand-in renderer folder (argv[2]) and prints one JSON line with url and token.
import { startWebShell } from '../../app/web/serve.ts';

const shell = await startWebShell({ rendererDir: process.argv[2], quiet: true, threads: 1 });
process.stdout.write(JSON.stringify({ url: shell.url, token: shell.token }) + '\n');
process.on('SIGTERM', async () => {
  await shell.close();
  process.exit(0);
});
