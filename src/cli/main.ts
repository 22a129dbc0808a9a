/**
 * The `ancbench` command line: dispatches sub-commands and turns every expected failure (bad flags,
 * bad files, invalid scenarios) into one clear message on stderr and a non-zero exit status.
 */
import { ScenarioError } from '../plant/scenario.ts';
import { InputError } from '../io/files-node.ts';
import { WavError } from '../io/wav.ts';
import { toolVersion, UsageError } from './common.ts';
import { simulateCommand } from './simulate-command.ts';
import { identifyCommand } from './identify-command.ts';
import { analyzeCommand } from './analyze-command.ts';
import { checkLimitsCommand } from './check-limits-command.ts';
import { replayCommand } from './replay-command.ts';
import { sweepCommand } from './sweep-command.ts';

type Command = (argv: string[]) => Promise<number>;

const COMMANDS: Record<string, { run: Command; summary: string }> = {
  simulate: { run: simulateCommand, summary: 'run a scenario closed-loop, control off vs on' },
  identify: { run: identifyCommand, summary: 'identify the secondary path of a scenario\'s simulated plant' },
  analyze: { run: analyzeCommand, summary: 'coherence bound, causality and band attenuation from recordings' },
  'check-limits': { run: checkLimitsCommand, summary: 'ramp test signals past the output cap and check that it holds' },
  replay: { run: replayCommand, summary: 'run recorded control-off signals through other settings (what if)' },
  sweep: { run: sweepCommand, summary: 'run every combination of a grid of settings in parallel, best first' },
};

function usage(): string {
  const rows = Object.entries(COMMANDS).map(([k, v]) => `  ${k.padEnd(13)} ${v.summary}`);
  return `ancbench ${toolVersion()}: a workbench for prototyping active noise control

usage: ancbench <command> [options]

commands:
${rows.join('\n')}

ancbench <command> --help shows a command's options.`;
}

export async function main(argv: string[]): Promise<number> {
  const [cmd, ...rest] = argv;
  if (!cmd || cmd === '-h' || cmd === '--help' || cmd === 'help') {
    process.stdout.write(usage() + '\n');
    return cmd ? 0 : 2;
  }
  if (cmd === '--version' || cmd === '-v') {
    process.stdout.write(toolVersion() + '\n');
    return 0;
  }
  const c = COMMANDS[cmd];
  if (!c) {
    process.stderr.write(`ancbench: unknown command "${cmd}"\n\n${usage()}\n`);
    return 2;
  }
  try {
    return await c.run(rest);
  } catch (e) {
    if (e instanceof UsageError) {
      process.stderr.write(`ancbench ${cmd}: ${e.message}\n`);
      return 2;
    }
    if (e instanceof ScenarioError || e instanceof InputError || e instanceof WavError) {
      process.stderr.write(`ancbench ${cmd}: ${e.message}\n`);
      return 1;
    }
    throw e;
  }
}
