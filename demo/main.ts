/**
 * The demo page: mounts the panel on the demo scenarios (bundled into the page, so nothing is
 * fetched), opening on the workshop extractor hum.
 */
import '../src/web/zod-jitless.ts';
import '../src/ui/app.ts';
import { parseScenario } from '../src/index.ts';
import type { ScenarioEntry } from '../src/ui/sim-source.ts';

const FIRST = 'workshop-extractor-hum';

const files = import.meta.glob<unknown>('./scenarios/*.json', { eager: true, import: 'default' });
const entries: ScenarioEntry[] = [];
for (const [path, json] of Object.entries(files)) {
  const id = path.replace(/^.*\//, '').replace(/\.json$/, '');
  try {
    const scenario = parseScenario(json);
    // recorded sources need files from disk: the command-line simulator runs those
    if (scenario.sources.some((s) => s.kind === 'wav')) continue;
    entries.push({ id, scenario });
  } catch (e) {
    console.warn(`scenario ${id} skipped: ${(e as Error).message}`);
  }
}
entries.sort((a, b) => (a.id === FIRST ? -1 : b.id === FIRST ? 1 : a.id.localeCompare(b.id)));

const app = document.createElement('ancb-app');
app.scenarios = entries;
document.body.append(app);
