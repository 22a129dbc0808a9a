/**
 * Enforced layers: every import in src/ and worklets/ against the layer table in DEVELOPERS.md.
 */
import { readFileSync, readdirSync, statSync } from 'node:fs';
import { dirname, join, relative, resolve } from 'node:path';
import { describe, expect, it } from 'vitest';

const root = resolve(import.meta.dirname, '..');

interface Layer {
  name: string;
  folder: string;
  layers: Set<string>;
  packages: string[];
}

/** The table between the layers markers of DEVELOPERS.md. */
function layerTable(): Layer[] {
  const doc = readFileSync(join(root, 'DEVELOPERS.md'), 'utf8');
  const body = doc.split('<!-- layers:start -->')[1]?.split('<!-- layers:end -->')[0];
  if (!body) throw new Error('DEVELOPERS.md has no layers table between <!-- layers:start --> and <!-- layers:end -->');
  const list = (cell: string) => (cell.trim() === '—' ? [] : cell.split(',').map((x) => x.trim()).filter(Boolean));
  return body
    .split('\n')
    .filter((l) => l.startsWith('|') && !l.includes('---') && !l.includes('| layer |'))
    .map((l) => {
      const [name, folder, layers, packages] = l.split('|').slice(1, 5).map((c) => c.trim());
      return { name: name!, folder: folder!, layers: new Set(list(layers!)), packages: list(packages!) };
    });
}

function walk(dir: string, out: string[] = []): string[] {
  for (const f of readdirSync(dir)) {
    const p = join(dir, f);
    if (statSync(p).isDirectory()) walk(p, out);
    else if (f.endsWith('.ts')) out.push(p);
  }
  return out;
}

/** [file, specifier] for every static import, re-export and dynamic import of a module. */
function imports(file: string): string[] {
  const src = readFileSync(file, 'utf8');
  const specs: string[] = [];
  for (const m of src.matchAll(/^\s*(?:import|export)\s[^;]*?\bfrom\s+['"]([^'"]+)['"]|^\s*import\s+['"]([^'"]+)['"]|\bimport\(\s*['"]([^'"]+)['"]\s*\)/gm)) {
    specs.push((m[1] ?? m[2] ?? m[3])!);
  }
  return specs;
}

/** Allowed beyond the table, with the reason. */
const EXCEPTIONS: { file: string; layer: string; why: string }[] = [
  { file: 'worklets/sim-processor.ts', layer: 'plant', why: 'runs the simulated plant on the audio thread' },
];

describe('layers', () => {
  const table = layerTable();
  const layerOfPath = (p: string): Layer | undefined => {
    const rel = relative(root, p).split('?')[0]!;
    return table.find((l) => rel === l.folder || rel.startsWith(l.folder + '/'));
  };
  const files = table.flatMap((l) => (l.folder.endsWith('.ts') ? [join(root, l.folder)] : walk(join(root, l.folder))));

  it('should read a table that names every folder of src/ and worklets/', () => {
    expect(table.map((l) => l.name)).toEqual(expect.arrayContaining(['dsp', 'engine', 'live', 'protocol', 'plant', 'analysis', 'io', 'cli', 'worklets', 'web', 'ui']));
    const folders = readdirSync(join(root, 'src')).filter((f) => statSync(join(root, 'src', f)).isDirectory());
    // the one file at the top of src/ is the Node public entry (the api row)
    expect(readdirSync(join(root, 'src')).filter((f) => f.endsWith('.ts'))).toEqual(['index.ts', 'palette.ts'].filter((f) => readdirSync(join(root, 'src')).includes(f)));
    for (const f of folders) expect(table.some((l) => l.folder === `src/${f}`), `src/${f} is not in the layer table`).toBe(true);
  });

  /** Problems of one file's imports (file given as an absolute path, imports as written). */
  const check = (file: string, specs: string[]): string[] => {
    const problems: string[] = [];
    const own = layerOfPath(file)!;
    const rel = relative(root, file);
    for (const spec of specs) {
      if (spec.startsWith('.')) {
        const target = layerOfPath(resolve(dirname(file), spec));
        if (!target) {
          if (!/\.d\.ts$/.test(spec) && !/package\.json$/.test(spec)) problems.push(`${rel}: imports ${spec}, outside every layer`);
          continue;
        }
        if (target === own || own.layers.has(target.name)) {
          if ((own.name === 'web' || own.name === 'ui') && /-node\.ts$/.test(spec)) problems.push(`${rel}: imports the Node-only file ${spec}`);
          continue;
        }
        if (EXCEPTIONS.some((x) => x.file === rel && x.layer === target.name)) continue;
        problems.push(`${rel} (${own.name}): imports ${spec} (${target.name}), which its layer may not`);
      } else {
        const pkg = spec.startsWith('@') ? spec.split('/').slice(0, 2).join('/') : spec.split('/')[0]!;
        const ok = own.packages.some((p) => p === pkg || (p === 'node:*' && pkg.startsWith('node:')));
        if (!ok) problems.push(`${rel} (${own.name}): imports the package ${pkg}, which its layer may not`);
        else if (own.name === 'io' && pkg.startsWith('node:') && !/-node\.ts$/.test(rel)) problems.push(`${rel}: uses ${pkg}; only io files ending -node.ts may use Node`);
      }
    }
    return problems;
  };

  describe('with every file of src/ and worklets/', () => {
    it('should import only the layers and packages its layer may import', () => {
      expect(files.flatMap((f) => check(f, imports(f)))).toEqual([]);
    });
  });

  describe('with imports that break the table', () => {
    it('should name each of them', () => {
      expect(check(join(root, 'src/dsp/x.ts'), ['../engine/engine.ts', 'lit'])).toEqual([
        'src/dsp/x.ts (dsp): imports ../engine/engine.ts (engine), which its layer may not',
        'src/dsp/x.ts (dsp): imports the package lit, which its layer may not',
      ]);
      expect(check(join(root, 'worklets/live-processor.ts'), ['../src/plant/scenario.ts'])).toHaveLength(1);
      expect(check(join(root, 'src/ui/x.ts'), ['../io/files-node.ts'])).toHaveLength(1);
      expect(check(join(root, 'src/io/wav.ts'), ['node:fs'])).toHaveLength(1);
    });
  });
});
