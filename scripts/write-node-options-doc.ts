// Writes the options tables of README's "Use it in your own page" from the settings tables
// (src/web/node-controller-options.ts nodeOptionsMarkdown); a test fails while README is out of date.
import { readFileSync, writeFileSync } from 'node:fs';
import { resolve } from 'node:path';
import { nodeOptionsMarkdown } from '../src/web/node-controller-options.ts';

export const START = '<!-- node-options:start -->';
export const END = '<!-- node-options:end -->';

/** README with the generated tables between the markers. */
export function withNodeOptions(readme: string): string {
  const a = readme.indexOf(START);
  const b = readme.indexOf(END);
  if (a < 0 || b < a) throw new Error(`README.md: markers ${START} … ${END} not found`);
  return `${readme.slice(0, a + START.length)}\n${nodeOptionsMarkdown()}\n${readme.slice(b)}`;
}

if (process.argv[1] && resolve(process.argv[1]) === resolve(import.meta.filename)) {
  const path = resolve(import.meta.dirname, '../README.md');
  writeFileSync(path, withNodeOptions(readFileSync(path, 'utf8')));
  console.log('wrote the options tables into README.md');
}
