#!/usr/bin/env node
// The `plumbline` command: registers the TypeScript loader, then runs the CLI.
import { register } from 'tsx/esm/api';

register();
await import('./main.ts');
