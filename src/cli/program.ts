// The command tree: every command, its arguments, options and help, read by the command-line library
// (commander). Handlers live beside this file (and in src/eval/command.ts); each returns its exit code.

import { Command, CommanderError, Option } from 'commander';
import { addEvalCommands } from '../eval/command.js';
import { exportFeedback } from '../feedback/index.js';
import { backup, keyNew, modelPull, modelStatus, printConfig, SCOPES } from './admin.js';
import { check } from './check.js';
import { EXIT, EXIT_HELP, type CliContext } from './context.js';
import { ingest, reindex, type IngestOptions } from './ingest.js';
import { collectionArg } from './options.js';
import { serve } from './serve.js';
import { worker } from './worker.js';

const ENVIRONMENT_HELP = `Environment: PORT, HOST, SOURCEBOUND_DATA_DIR, SOURCEBOUND_CONFIG (a JSON file), SOURCEBOUND_LOG_LEVEL,
SOURCEBOUND_LOG_FORMAT, SOURCEBOUND_EMBEDDER, SOURCEBOUND_MODEL_DIR, SOURCEBOUND_COMPLETION_URL,
SOURCEBOUND_COMPLETION_MODEL, SOURCEBOUND_COMPLETION_API_KEY. See docs/configuration.md.`;

export interface Program {
  root: Command;
  /** The exit code of the handler that ran (0 when none did, e.g. for --help). */
  exitCode(): number;
  /** The command whose line was refused, and the library's message, when parsing failed. */
  refused(): { command: Command; message: string } | null;
}

export function buildProgram(ctx: CliContext): Program {
  let code: number = EXIT.ok;
  let refused: { command: Command; message: string } | null = null;
  const run =
    (fn: (...args: never[]) => Promise<number> | number) =>
    async (...args: unknown[]): Promise<void> => {
      code = await (fn as (...a: unknown[]) => Promise<number> | number)(...args);
    };

  const root = new Command('sourcebound')
    .description('sourcebound: answers questions from your documents, with citations')
    .addOption(
      new Option('--log <format>', 'log lines on standard error as text, or as json (one object a line); default: the logFormat setting').choices(['text', 'json']),
    );

  root.command('serve').description('start the HTTP service (npm start)').action(run(() => serve(ctx)));
  root
    .command('worker')
    .description('run upload and re-index jobs from the PostgreSQL back end (storage.backend "postgres") until stopped')
    .action(run(() => worker(ctx)));

  const ingestOptions = (c: Command): Command =>
    c
      .option('-c, --collection <name>', 'the collection (default: the seed collection)', collectionArg)
      .option('--full', 're-read and re-embed every document, changed or not')
      .option('--json', 'print the summary as one JSON object (docs/operations.md lists its keys)');
  ingestOptions(
    root
      .command('ingest')
      .summary('add a folder or file; folders are remembered for reindex')
      .description('Adds a folder or file to a collection; folders are remembered for `sourcebound reindex`.')
      .argument('<path...>', 'folders or files to ingest'),
  ).action(run((paths: string[], opts: IngestOptions) => ingest(ctx, paths, opts)));
  ingestOptions(root.command('reindex').description("bring every remembered folder's documents up to date")).action(
    run((opts: IngestOptions) => reindex(ctx, opts)),
  );

  addEvalCommands(root, ctx, run);

  const model = root.command('model').description('the embedding model');
  model
    .command('pull')
    .description('download the embedding model into the model folder')
    .argument('[id]', 'the model (default: embedding.model)')
    .action(run((id?: string) => modelPull(ctx, id)));
  model
    .command('status')
    .description('say which embedder the service would use')
    .argument('[id]', 'the model (default: embedding.model)')
    .action(run((id?: string) => modelStatus(ctx, id)));

  root
    .command('key')
    .description('API keys')
    .command('new')
    .description('make an API key and print its config entry')
    .option('--id <id>', 'the key id shown in logs (default: a random one)')
    .option('--scopes <list>', `comma-separated, from ${SCOPES.join(', ')}`, 'query')
    .option('--collections <list>', 'comma-separated collection names, or * for all', '*')
    .action(run((opts: { id?: string; scopes: string; collections: string }) => keyNew(ctx, opts)));

  root
    .command('feedback')
    .description("the desk's answer ratings")
    .command('export')
    .summary("write the desk's answer ratings as a question set for `eval answers --questions F`")
    .description("Writes the desk's answer ratings as a question set for `sourcebound eval answers --questions F`.")
    .option('-o, --out <file>', 'write the question set here (default: standard output)')
    .option('-c, --collection <name>', 'only the ratings of this collection', collectionArg)
    .action(run((opts: { out?: string; collection?: string }) => exportFeedback(opts, ctx.env, { stdout: ctx.io.out, stderr: ctx.io.err })));

  root
    .command('backup')
    .description('write a consistent copy of the database (safe while serving)')
    .argument('<file>', 'where to write the copy')
    .action(run((file: string) => backup(ctx, file)));

  root
    .command('check')
    .description("check the store: SQLite's and FTS5's integrity checks, index files against the database, orphan files (exit 1 on a problem)")
    .option('--json', 'print the report as one JSON object')
    .action(run((opts: { json?: boolean }) => check(ctx, opts)));

  root
    .command('config')
    .description('print the effective configuration (secrets redacted), validate it, or list every option')
    .option('--check', 'only validate it')
    .option('--reference', 'list every option with its default and description')
    .action(run((opts: { check?: boolean; reference?: boolean }) => printConfig(ctx, opts)));

  root.addHelpText('after', `\nRun \`sourcebound <command> --help\` for a command's options.\n\n${ENVIRONMENT_HELP}\n\n${EXIT_HELP}`);
  for (const c of allCommands(root)) {
    c.exitOverride()
      .configureOutput({
        writeOut: ctx.io.out,
        writeErr: ctx.io.err,
        // The library's own error line is replaced by ours (src/cli.ts), so exactly one line is printed.
        outputError: (message: string) => {
          refused = { command: c, message };
        },
      })
      .configureHelp({ showGlobalOptions: true, visibleCommands: leafCommands, subcommandTerm: (sub: Command) => `${commandPath(sub)} ${sub.usage()}` })
      .showSuggestionAfterError(true);
    if (c !== root) c.addHelpText('after', `\n${EXIT_HELP}`);
  }
  return { root, exitCode: () => code, refused: () => refused };
}

/** Every command of the tree, the root first. */
export function allCommands(root: Command): Command[] {
  return [root, ...root.commands.flatMap((c) => allCommands(c))];
}

/** The commands that do something (no sub-commands), listed under a command's help with their full path. */
function leafCommands(cmd: Command): Command[] {
  return cmd.commands.flatMap((c) => (c.commands.length > 0 ? leafCommands(c) : [c]));
}

/** "eval answers" for `sourcebound eval answers`. */
export function commandPath(cmd: Command): string {
  const names: string[] = [];
  for (let c: Command | null = cmd; c?.parent; c = c.parent) names.unshift(c.name());
  return names.join(' ');
}

export function isCommanderError(err: unknown): err is CommanderError {
  return err instanceof CommanderError;
}
