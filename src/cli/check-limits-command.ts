/**
 * `ancbench check-limits <scenario.json> [--json] [--out DIR]`: the level-cap check on a scenario's output
 * stage (src/engine/level-cap-check.ts) and the scenario's closed loop against the same cap.
 *
 * Exit status: 0 when the cap held, 3 when it was exceeded (by the check or the closed loop), 1 for a bad
 * file, 2 for bad flags.
 */
import { describeEventValues } from '../engine/events.ts';
import { createOutputCalibration, type OutputCalibration } from '../engine/calibration.ts';
import { TruePeakMeter } from '../dsp/true-peak.ts';
import { amplitudeToDb } from '../dsp/units.ts';
import { InputError, OutputFolder, readJson } from '../io/files-node.ts';
import { fixed, renderLimitsReport, type ClosedLoopCap } from '../io/limits-report-html.ts';
import { buildLimitsReport, type LimitsReportFields } from '../io/limits-report.ts';
import { readReportAssets, REPORT_FILE } from '../io/report-html-node.ts';
import { loadScenarioFile } from '../io/scenario-file-node.ts';
import { levelCapConfigFromScenario, limitsTruePeak, runLevelCapCheck, TRUE_PEAK_TOLERANCE_DB, type LevelCapResult, type TestSignalSettings } from '../engine/level-cap-check.ts';
import type { Scenario } from '../plant/scenario.ts';
import { simulate } from '../plant/simulate.ts';
import type { WavTable } from '../plant/sources.ts';
import { fmtNum, safeJson, stamp, UsageError, type Stamp, numberFlag, outFlag, parseCommandArgs } from './common.ts';
import { progressBar } from './progress.ts';

export const CHECK_LIMITS_USAGE = `usage: ancbench check-limits <scenario.json> [--json] [--out DIR]

Checks that the scenario's output stage (high-pass, start ramp, limiter, hard ceiling) holds the
output cap: a tone, noise and an adversarial signal (square waves near Nyquist, steps, bursts,
NaN/±Infinity, huge values) are each ramped from a safe level to 12 dB above the cap, every output
sample is measured (sample peak and 4x true peak, ITU-R BS.1770-4), with the limiter's gain
reduction and the guard's events. Then the scenario's closed loop runs with control on and its
output is measured against the same cap.

Exit status: 0 when the cap held, 3 when it was exceeded, 1 for a bad file, 2 for bad flags. In the
default output stage (limiter, then the true-peak filter) and with "truePeak": true, 0 means no output
sample above the cap and a 4x true peak at most 0.5 dB above it. With "truePeak": false (sample peaks
only) 0 means no output sample above the cap; the true peak is reported, not limited, and the verdict
reads "sample peak held; true peak not limited: X dBTP".

  --json               print one JSON object on stdout instead of the readable summary
  --out DIR            write DIR/report.json and DIR/report.html (plots, every event)
  --start-dbfs L       level the ramp starts at, dBFS, -120 to 0 (default -40)
  --over-db D          how far above the cap the ramp goes, dB, 0 to 40 (default 12)
  --ramp-s S           ramp duration per signal kind, s, 0.05 to 600 (default 2)
  --tone-hz F          test tone frequency, Hz (default 1000, or the calibration's most sensitive one)
  --calibration FILE   output calibration, JSON {"points": [{"hz", "dbfs", "measuredDbSpl"}, ...],
                       "peakCeilingDbSpl": N}: the stricter of the dBFS and the SPL ceiling applies
  --spl-ceiling DB     peak SPL ceiling at the listening position, dB SPL (needs --calibration;
                       overrides the file's peakCeilingDbSpl)
  --no-closed-loop     skip the closed-loop run
  -h, --help           this text`;

/** Exit status when the cap was exceeded. */
export const EXIT_CAP_EXCEEDED = 3;

/** The report (report.json; `--json` prints it without the history). The first six fields are fixed names. */
export interface CheckLimitsReport extends LimitsReportFields {
  /** The check and the closed loop both held the cap (in a sample-peak mode: the sample peak only; see `verdict`). */
  passed: boolean;
  scenario: string;
  name: string | null;
  closedLoop: Omit<ClosedLoopCap, 'peakTimeline'> | null;
  history?: LevelCapResult['history'];
  stamp: Stamp;
}

function parseArgsOrThrow(argv: string[]) {
  return parseCommandArgs(argv, {
    json: { type: 'boolean' },
    out: { type: 'string' },
    'start-dbfs': { type: 'string' },
    'over-db': { type: 'string' },
    'ramp-s': { type: 'string' },
    'tone-hz': { type: 'string' },
    calibration: { type: 'string' },
    'spl-ceiling': { type: 'string' },
    'no-closed-loop': { type: 'boolean' },
  } as const, CHECK_LIMITS_USAGE, true);
}

/** An output-calibration file: {"points": [{hz, dbfs, measuredDbSpl}, ...], "peakCeilingDbSpl"?: number}. */
export function parseCalibrationFile(json: unknown, path: string): { calibration: OutputCalibration; peakCeilingDbSpl: number | undefined } {
  if (typeof json !== 'object' || json === null || Array.isArray(json)) {
    throw new InputError(`calibration file "${path}": must be an object {"points": [...], "peakCeilingDbSpl": N}, got ${Array.isArray(json) ? 'an array' : String(json)}`);
  }
  const o = json as Record<string, unknown>;
  const unknownKeys = Object.keys(o).filter((k) => k !== 'points' && k !== 'peakCeilingDbSpl' && k !== 'device' && k !== 'description');
  if (unknownKeys.length) throw new InputError(`calibration file "${path}": unknown field(s) ${unknownKeys.map((k) => `"${k}"`).join(', ')}`);
  const p = o.peakCeilingDbSpl;
  if (p !== undefined && (typeof p !== 'number' || !(p >= -50 && p <= 200))) {
    throw new InputError(`calibration file "${path}": peakCeilingDbSpl must be a number from -50 to 200 dB SPL, got ${JSON.stringify(p)}`);
  }
  try {
    return { calibration: createOutputCalibration(o.points as never), peakCeilingDbSpl: p as number | undefined };
  } catch (e) {
    if (e instanceof RangeError) throw new InputError(`calibration file "${path}": ${e.message}`);
    throw e;
  }
}

/** The scenario's closed loop with control on, measured against the cap `ceilingDbfs` (which it runs with). */
export function closedLoopAgainstCap(sc: Scenario, ceilingDbfs: number, truePeakMode: boolean, opts: { wavs?: WavTable; secondaryPathModel?: Float32Array; onProgress?: (f: number) => void } = {}): ClosedLoopCap {
  const { outputCeilingDbfs: _shorthand, ...rest } = sc;
  const capped: Scenario = { ...rest, limiter: { ...(sc.limiter ?? {}), ceilingDbfs } };
  const r = simulate(capped, { record: true, wienerMaxS: 0, ...opts });
  const out = r.signals!.output;
  const c = Math.pow(10, ceilingDbfs / 20);
  const meter = new TruePeakMeter();
  meter.process(out, out.length);
  let over = 0;
  let nonFinite = 0;
  let peak = 0;
  const hop = Math.max(1, Math.round(0.01 * r.sampleRate));
  const hops = Math.ceil(out.length / hop);
  const timeS = new Float64Array(hops);
  const peakDbfs = new Float64Array(hops);
  for (let k = 0; k < hops; k++) {
    let hp = 0;
    const end = Math.min(out.length, (k + 1) * hop);
    for (let i = k * hop; i < end; i++) {
      const v = out[i]!;
      if (!Number.isFinite(v)) nonFinite++;
      const a = Math.abs(v);
      if (a > c) over++;
      if (a > hp) hp = a;
    }
    if (hp > peak) peak = hp;
    timeS[k] = end / r.sampleRate;
    peakDbfs[k] = amplitudeToDb(hp);
  }
  const tp = meter.peakDbtp;
  const withinCap = over === 0 && nonFinite === 0 && (!truePeakMode || tp <= ceilingDbfs + TRUE_PEAK_TOLERANCE_DB);
  return {
    durationS: r.durationS,
    ceilingDbfs,
    peakOutputDbfs: peak > 0 ? amplitudeToDb(peak) : null,
    truePeakDbtp: Number.isFinite(tp) ? tp : null,
    samplesOverCeiling: over,
    nonFiniteOutputSamples: nonFinite,
    withinCap,
    diverged: r.diverged,
    divergenceReasons: r.divergenceReasons,
    events: r.events,
    peakTimeline: { timeS, peakDbfs },
  };
}

export function buildReport(path: string, sc: Scenario, r: LevelCapResult, cl: ClosedLoopCap | null, st: Stamp): CheckLimitsReport {
  const moreReasons: string[] = [];
  if (cl && !cl.withinCap) {
    moreReasons.push(
      `the closed loop's output exceeded the cap: ${cl.samplesOverCeiling} samples above ${cl.ceilingDbfs.toFixed(2)} dBFS, ${cl.nonFiniteOutputSamples} non-finite, true peak ${fixed(cl.truePeakDbtp, 2)} dBTP`,
    );
  }
  const moreNotes: string[] = [];
  if (cl && r.ceiling.limitedBy === 'spl') moreNotes.push(`the closed loop ran with the SPL-derived ceiling ${r.ceilingDbfs.toFixed(2)} dBFS instead of the scenario's ${r.ceiling.dbfsCeiling} dBFS`);
  let closedLoop: CheckLimitsReport['closedLoop'] = null;
  if (cl) {
    const { peakTimeline: _t, ...rest } = cl;
    closedLoop = rest;
  }
  return buildLimitsReport(r, {
    moreReasons,
    origin: { scenario: path, name: sc.name ?? null },
    closedLoop,
    moreNotes,
    tail: { stamp: st },
    moreTruePeakDbtp: cl?.truePeakDbtp ?? null,
  });
}

export function readableSummary(rep: CheckLimitsReport): string {
  // figures with a true minus sign, like every command's text output; n/a where there is none
  const num = (v: number | null | undefined, digits = 2): string => (v === null || v === undefined || !Number.isFinite(v) ? 'n/a' : fmtNum(v, digits));
  const c = rep.ceilingDbfs;
  const x = rep.check;
  const lines = [
    `scenario      ${rep.scenario}${rep.name ? `  (${rep.name})` : ''}`,
    `verdict       ${rep.verdict}`,
    `cap           ${num(c, 2)} dBFS ${limitsTruePeak(rep.limiterMode) ? 'sample peak and 4x true peak' : 'sample peak'}${rep.ceiling.spl ? ` (stricter of ${rep.ceiling.dbfsCeiling} dBFS and ${rep.ceiling.spl.peakCeilingDbSpl} dB SPL peak: ${rep.ceiling.limitedBy} rule)` : ''}`,
    `limiter       ${rep.limiterMode}, ${rep.latencySamples} sample${rep.latencySamples === 1 ? '' : 's'} (${num((1000 * rep.latencySamples) / x.sampleRate, 3)} ms) of added latency`,
    `test signal   ${x.segments.filter((s) => s.kind !== 'gap').map((s) => s.kind).join(', ')}: ${num(x.startDbfs, 1)} → ${num(x.topDbfs, 1)} dBFS, ${x.durationS.toFixed(2)} s`,
    `sample peak   ${num(rep.maxSamplePeakDbfs, 3)} dBFS (${num(rep.maxSamplePeakDbfs - c, 3)} dB from the cap), ${rep.samplesOverCeiling} samples over`,
    `true peak     ${num(rep.maxTruePeakDbtp)} dBTP (${num(rep.maxTruePeakDbtp - c)} dB from the cap${rep.truePeakToleranceDb !== null ? `, limited to +${rep.truePeakToleranceDb} dB` : '; reported, not limited, in this mode'})`,
    `gain reduct.  up to ${num(rep.maxGainReductionDb, 1)} dB; ${rep.nonFiniteOutputSamples} non-finite outputs (${x.nonFiniteInputSamples} non-finite test samples silenced)`,
  ];
  if (x.maxPeakDbSplBound !== null) lines.push(`peak SPL      at most ${num(x.maxPeakDbSplBound, 1)} dB SPL at the listening position`);
  const cl = rep.closedLoop;
  if (cl) {
    lines.push(
      `closed loop   peak ${num(cl.peakOutputDbfs, 2)} dBFS, true peak ${num(cl.truePeakDbtp, 2)} dBTP over ${cl.durationS.toFixed(2)} s: ${cl.withinCap ? 'within the cap' : 'CAP EXCEEDED'}${cl.diverged ? ' (the guard acted)' : ''}`,
    );
  }
  const shown = [...rep.events.map((e) => ({ e, where: 'check' })), ...(cl?.events ?? []).map((e) => ({ e, where: 'loop ' }))];
  for (const { e, where } of shown.slice(0, 12)) {
    lines.push(`event ${where}   ${e.timeS.toFixed(3)} s  ${e.cause} → ${e.action}  ${describeEventValues(e)}`);
  }
  if (shown.length > 12) lines.push(`event         … ${shown.length - 12} more in report.json`);
  for (const n of rep.notes) lines.push(`note          ${n}`);
  return lines.join('\n');
}

export async function checkLimitsCommand(argv: string[]): Promise<number> {
  const { values, positionals } = parseArgsOrThrow(argv);
  if (values.help) {
    process.stdout.write(CHECK_LIMITS_USAGE + '\n');
    return 0;
  }
  if (positionals.length !== 1) throw new UsageError(`check-limits takes exactly one scenario file, got ${positionals.length}\n\n${CHECK_LIMITS_USAGE}`);
  const signal: TestSignalSettings = {};
  const start = numberFlag('start-dbfs', values['start-dbfs'], -120, 0);
  const over = numberFlag('over-db', values['over-db'], 0, 40);
  const ramp = numberFlag('ramp-s', values['ramp-s'], 0.05, 600);
  const tone = numberFlag('tone-hz', values['tone-hz'], 1, 96000);
  if (start !== undefined) signal.startDbfs = start;
  if (over !== undefined) signal.overDb = over;
  if (ramp !== undefined) signal.rampS = ramp;
  if (tone !== undefined) signal.toneHz = tone;
  const splFlag = numberFlag('spl-ceiling', values['spl-ceiling'], -50, 200);
  if (splFlag !== undefined && !values.calibration) throw new UsageError('--spl-ceiling needs --calibration (the output calibration that turns dB SPL into dBFS)');

  const path = positionals[0]!;
  const loaded = loadScenarioFile(path);
  const sc = loaded.scenario;
  if (tone !== undefined && tone >= sc.sampleRate / 2) throw new UsageError(`--tone-hz must be below the scenario's Nyquist frequency ${sc.sampleRate / 2} Hz, got ${tone}`);
  let spl: { outputCalibration: OutputCalibration; peakCeilingDbSpl: number } | null = null;
  if (values.calibration) {
    const cal = parseCalibrationFile(readJson(values.calibration, 'calibration file'), values.calibration);
    const peak = splFlag ?? cal.peakCeilingDbSpl;
    if (peak === undefined) throw new UsageError(`an SPL ceiling is needed with --calibration: give --spl-ceiling or "peakCeilingDbSpl" in "${values.calibration}"`);
    spl = { outputCalibration: cal.calibration, peakCeilingDbSpl: peak };
  }

  // Prepared before the run: an unwritable place is said now; removed again if anything fails (common.ts).
  const outDir = outFlag('out', values.out);
  const out = outDir !== undefined ? OutputFolder.prepare(outDir, ['report.json', REPORT_FILE]) : null;
  const bar = progressBar('checking limits');
  let r: LevelCapResult;
  let cl: ClosedLoopCap | null = null;
  try {
    const cfg = levelCapConfigFromScenario(sc, { signal, ...(spl ?? {}) });
    r = runLevelCapCheck(cfg, { onProgress: (f) => bar.update(values['no-closed-loop'] ? f : 0.2 * f) });
    if (!values['no-closed-loop']) {
      cl = closedLoopAgainstCap(sc, r.ceilingDbfs, limitsTruePeak(r.limiterMode), {
        wavs: loaded.wavs,
        ...(loaded.secondaryPathModel ? { secondaryPathModel: loaded.secondaryPathModel } : {}),
        onProgress: (f) => bar.update(0.2 + 0.8 * f),
      });
    }
  } catch (e) {
    // the engine's own validation (for example a ceiling the SPL rule pushed below −120 dBFS)
    if (e instanceof RangeError) throw new InputError(`scenario "${path}": ${e.message}`);
    throw e;
  } finally {
    bar.stop();
  }
  const report = buildReport(path, sc, r, cl, stamp('check-limits', sc.seed, loaded.sha256));
  if (out) {
    const html = renderLimitsReport(
      {
        scenario: path,
        name: sc.name ?? null,
        check: r,
        closedLoop: cl,
        passed: report.passed,
        reasons: report.reasons,
        footer: `ancbench ${report.stamp.version} · seed ${sc.seed} · scenario SHA-256 ${loaded.sha256}`,
      },
      readReportAssets(),
    );
    out.write('report.json', safeJson(report) + '\n');
    out.write(REPORT_FILE, html);
    out.commit();
  }
  if (values.json) {
    const { history: _h, ...compact } = report;
    process.stdout.write(safeJson(compact, 0) + '\n');
  } else {
    process.stdout.write(readableSummary(report) + '\n');
    if (values.out) process.stdout.write(`wrote         ${values.out}/report.json, ${REPORT_FILE}\n`);
  }
  return report.passed ? 0 : EXIT_CAP_EXCEEDED;
}
