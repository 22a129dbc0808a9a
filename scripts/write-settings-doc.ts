// Writes docs/settings.md from the settings tables in src/engine/settings.ts.
import { writeFileSync } from 'node:fs';
import { resolve } from 'node:path';
import { settingsMarkdown } from '../src/engine/settings.ts';

writeFileSync(resolve(import.meta.dirname, '../docs/settings.md'), settingsMarkdown());
console.log('wrote docs/settings.md');
