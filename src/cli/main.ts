/**
 * The `ancbench` command line: dispatches sub-commands; every failure goes through one error path
 * (`runCommand` in common.ts): one line on stderr naming the input and the problem, exit status 2 for
 * bad flags and 1 for anything else, nothing left half-written. `--debug` adds the stack.
 */
import { nearestFlag, runCommand, toolVersion } from './common.ts';
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

ancbench <command> --help shows a command's options; --debug adds the stack to an error message.`;
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
  const c = Object.hasOwn(COMMANDS, cmd) ? COMMANDS[cmd] : undefined;
  if (!c) {
    const near = nearestFlag(cmd, Object.keys(COMMANDS));
    const shown = JSON.stringify(cmd.length > 40 ? cmd.slice(0, 37) + '...' : cmd);
    process.stderr.write(`ancbench: unknown command ${shown}${near ? `; did you mean ${near}?` : ''} (commands: ${Object.keys(COMMANDS).join(', ')}; ancbench --help)\n`);
    return 2;
  }
  return runCommand(cmd, c.run, rest);
}
export { abortPendingOutputs } from '../io/files-node.ts';
