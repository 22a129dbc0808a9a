import { describe, expect, it } from 'vitest';
import { execFileSync } from 'node:child_process';
import { decodeBase64, fxlmsWasmBytes, fxlmsWasmModule, instantiateFxlmsKernels, wasmSimdSupported } from '../../src/dsp/wasm-module.ts';
import { Random } from '../../src/dsp/random.ts';

describe('wasm-module', () => {
  it('should embed exactly what asm/fxlms.ts compiles to', () => {
    // The generated module is committed; the build script recompiles in memory and compares.
    const run = (): string => execFileSync(process.execPath, ['scripts/build-wasm.mjs', '--check'], { encoding: 'utf8', stdio: ['ignore', 'pipe', 'pipe'] });
    expect(run()).toMatch(/up to date/);
  }, 60_000);

  it('should decode base64 as RFC 4648 §4 defines it (Node Buffer as the reference decoder)', () => {
    const rng = new Random(77);
    for (const len of [0, 1, 2, 3, 4, 5, 31, 32, 33, 1000]) {
      const data = new Uint8Array(len).map(() => rng.nextUint32() & 0xff);
      const text = Buffer.from(data).toString('base64');
      expect(Array.from(decodeBase64(text))).toEqual(Array.from(Buffer.from(text, 'base64')));
    }
    expect(() => decodeBase64('ab$d')).toThrow(/invalid base64 character at 2/);
  });

  it('should load a SIMD module with no imports that instantiates with its own memory', () => {
    expect(wasmSimdSupported()).toBe(true); // Node 20's V8 runs 128-bit SIMD
    const bytes = fxlmsWasmBytes();
    expect(Array.from(bytes.subarray(0, 4))).toEqual([0x00, 0x61, 0x73, 0x6d]); // "\0asm" (WebAssembly core spec, binary format)
    const module = fxlmsWasmModule();
    expect(WebAssembly.Module.imports(module)).toEqual([]);
    const names = WebAssembly.Module.exports(module).map((e) => e.name);
    for (const n of ['memory', 'tdInit', 'tdProcess', 'tdParams', 'cmacPartitions', 'cupdateUnconstrained']) expect(names).toContain(n);
    const a = instantiateFxlmsKernels(module);
    const b = instantiateFxlmsKernels(module);
    expect(a.memory).not.toBe(b.memory);
    expect(a.tdInit(100, 50, 64)).toBe(1);
    expect(a.tdPaddedTaps()).toBe(112);
    expect(a.tdPaddedModelTaps()).toBe(64);
  });
});
