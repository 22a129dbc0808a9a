import { describe, expect, it } from 'vitest';
import { escapeHtml, renderAnalysisReport, renderReportHtml, scriptJson, type ReportAssets, type ReportDocument } from '../../src/io/report-html.ts';
import { readReportAssets, simulationReportHtml } from '../../src/io/report-html-node.ts';
import { analyzeRecordings } from '../../src/analysis/recording-analysis.ts';
import { Random } from '../../src/dsp/random.ts';
import { parseScenario } from '../../src/plant/scenario.ts';
import { simulate, trueSecondaryPath } from '../../src/plant/simulate.ts';

const assets: ReportAssets = { uplotJs: 'window.uPlot = function () {}; /* library */', uplotCss: '.uplot { display: block }' };

/** The embedded plot data, parsed back. */
function embedded(html: string): { plots: { id: string; title: string; xScale: string; x: (number | null)[]; series: { label: string; values: (number | null)[] }[] }[] } {
  const m = /<script type="application\/json" id="report-data">([\s\S]*?)<\/script>/.exec(html);
  expect(m).not.toBeNull();
  return JSON.parse(m![1]!);
}

/** Every URL the page would fetch: src/href attributes and CSS url(...), other than data: and fragments. */
function externalReferences(html: string): string[] {
  const refs = [...html.matchAll(/\b(?:src|href)\s*=\s*["']?([^"'\s>]+)/gi), ...html.matchAll(/url\(\s*["']?([^"')]+)/gi)].map((m) => m[1]!);
  return refs.filter((r) => !r.startsWith('data:') && !r.startsWith('#'));
}

const doc: ReportDocument = {
  title: 'Plant room </script><script>alert(1)</script>',
  verdict: { kind: 'predictable-only', text: 'too late by 2 ms & more' },
  sections: [
    {
      title: 'Levels',
      table: { rows: [['attenuation', '12.0 dB']] },
      plots: [
        {
          title: 'Spectrum',
          xLabel: 'frequency (Hz)',
          yLabel: 'dB',
          xScale: 'log',
          x: [0, 10, 20, 40],
          series: [{ label: 'off', values: [1, -Infinity, Number.NaN, 2.123456789], color: '#000000' }],
        },
      ],
    },
  ],
};

describe('renderReportHtml', () => {
  it('should inline the library and style sheet and fetch nothing from anywhere', () => {
    const html = renderReportHtml(doc, assets);
    expect(html).toContain(assets.uplotJs);
    expect(html).toContain(assets.uplotCss);
    expect(externalReferences(html)).toEqual([]);
    expect(html).not.toMatch(/<link\b/i);
  });

  it('should escape text so that no title or note can end a script element or inject markup', () => {
    const html = renderReportHtml(doc, assets);
    expect(html).toContain('<title>Plant room &lt;/script&gt;&lt;script&gt;alert(1)&lt;/script&gt;</title>');
    expect(html).toContain('too late by 2 ms &amp; more');
    expect(html.match(/<script\b/g)!.length).toBe(3); // the data, the library and the drawing code
    expect(scriptJson({ t: '</script><!--' })).toBe('{"t":"\\u003c/script>\\u003c!--"}');
    expect(escapeHtml(`"a" & 'b'`)).toBe('&quot;a&quot; &amp; &#39;b&#39;');
  });

  it('should embed the data as JSON: x ≤ 0 dropped on a log axis, non-finite values as gaps, six digits', () => {
    const data = embedded(renderReportHtml(doc, assets));
    expect(data.plots).toHaveLength(1);
    expect(data.plots[0]!.x).toEqual([10, 20, 40]);
    expect(data.plots[0]!.series[0]!.values).toEqual([null, null, 2.12346]);
  });

  it('should refuse a series whose length differs from the x axis', () => {
    const bad: ReportDocument = { title: 't', sections: [{ title: 's', plots: [{ ...doc.sections[0]!.plots![0]!, x: [1, 2] }] }] };
    expect(() => renderReportHtml(bad, assets)).toThrow(/series "off" has 4 values for 2 x points/);
  });
});

describe('readReportAssets', () => {
  it('should read the installed uPlot build, which defines the global the drawing code uses', () => {
    const real = readReportAssets();
    expect(real.uplotJs).toMatch(/var uPlot\s*=/);
    expect(real.uplotCss).toMatch(/\.uplot/);
    expect(real.uplotJs).not.toMatch(/<\/script/i);
  });
});

describe('analysis and simulation reports', () => {
  it('should hold the verdict, the figures and the PSD, coherence, band and model plots of an analysis', () => {
    const fs = 8000;
    const rng = new Random(4);
    const x = new Float64Array(2 * fs).map(() => 0.1 * rng.gaussian());
    const y = x.map((_, i) => (i >= 16 ? 0.5 * x[i - 16]! : 0) + 0.001 * rng.gaussian());
    const taps = new Float64Array(64);
    taps[40] = 0.8;
    const a = analyzeRecordings({ sampleRate: fs, reference: x, errorOff: y, errorOn: y.map((v) => 0.5 * v), model: { taps, delayMs: 5 } });
    const html = renderAnalysisReport(a, { inputs: [['reference', 'ref.wav, channel 0']] }, assets);
    expect(html).toContain(a.causality.sentence);
    expect(html).toContain('class="verdict predictable-only"');
    expect(html).toContain('ref.wav, channel 0');
    const titles = embedded(html).plots.map((p) => p.title);
    expect(titles).toEqual([
      'Power spectral density',
      'Coherence bound per frequency',
      'Coherence between reference and error microphone',
      'One-third-octave band levels',
      'Secondary-path model: impulse response',
      'Secondary-path model: magnitude',
      'Secondary-path model: phase',
    ]);
    const bands = embedded(html).plots[3]!;
    expect(bands.series.map((s) => s.label)).toEqual(['error, control off', 'error, control on']);
    // Bars carry the band levels as analysed (rounded to six digits).
    expect(bands.series[0]!.values[10]).toBeCloseTo(a.bands[10]!.offDb, 3);
  });

  it('should build the simulate report from a recorded run: level over time, spectra, bands, bound and model', () => {
    const sc = parseScenario({
      schemaVersion: 1,
      sampleRate: 8000,
      blockSize: 32,
      durationS: 2,
      seed: 1,
      sources: [{ kind: 'noise', color: 'white', rms: 0.1 }],
      paths: { reference: { delayMs: 0 }, primary: { delayMs: 10, gain: 0.6 }, secondary: { delayMs: 5, gain: 0.8 } },
      sensorNoiseRms: 0.001,
      controller: { algorithm: 'fxnlms', taps: 48, stepSize: 0.05 },
    });
    const r = simulate(sc, { record: true });
    const summary = { ...r, scenario: 'plant.json', name: 'Test plant', outputCeilingDbfs: -6 };
    const html = simulationReportHtml(summary, r, { trueSecondaryPath: trueSecondaryPath(sc) });
    expect(externalReferences(html)).toEqual([]);
    const plots = embedded(html).plots;
    expect(plots.map((p) => p.title)).toEqual([
      'Error microphone level',
      'Power spectral density',
      'Coherence bound per frequency',
      'Coherence between reference and error microphone',
      'One-third-octave band levels',
      'Secondary-path model: impulse response',
      'Secondary-path model: magnitude',
    ]);
    expect(plots[0]!.x.length).toBe(r.timeline.timeS.length);
    expect(plots[5]!.series.map((s) => s.label)).toEqual(['model', 'true path']);
    expect(html).toContain('class="verdict broadband"');
  });

  it('should still write a simulate report for a run too short for spectra, saying why', () => {
    const sc = parseScenario({
      schemaVersion: 1,
      sampleRate: 8000,
      blockSize: 32,
      durationS: 0.05,
      seed: 1,
      sources: [{ kind: 'tone', hz: 100, amplitude: 0.3 }],
      paths: { reference: { delayMs: 0 }, primary: { delayMs: 10, gain: 0.5 }, secondary: { delayMs: 5, gain: 0.8 } },
      controller: { algorithm: 'fxnlms', taps: 16, stepSize: 0.01 },
    });
    const r = simulate(sc, { record: true });
    const html = simulationReportHtml({ ...r, scenario: 's.json', name: null, outputCeilingDbfs: -6 }, r);
    expect(html).toMatch(/the run is too short for spectra \(400 samples, at least 1024 needed\)/);
    expect(embedded(html).plots.map((p) => p.title)).toEqual(['Error microphone level', 'Secondary-path model: impulse response', 'Secondary-path model: magnitude']);
    // 0.2 s: long enough for spectra, though its last 25 % (400 samples) is not; the end of the run is used.
    const r2 = simulate(parseScenario({ ...sc, durationS: 0.2 }), { record: true });
    const html2 = simulationReportHtml({ ...r2, scenario: 's.json', name: null, outputCeilingDbfs: -6 }, r2);
    expect(embedded(html2).plots).toHaveLength(7);
  });
});
