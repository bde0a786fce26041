/**
 * The folder layers of src/ and the lint rule that keeps them: a file may import from its own folder and from the
 * folders its layer lists, never back up the data's path (intake → store → evaluate → incidents → channels → shells).
 * A new folder must be added here; an import that runs back up fails `npm run lint`.
 */
import { dirname, relative, resolve, sep } from 'node:path';
import { fileURLToPath } from 'node:url';

/** Each folder of src/ with the folders it may import from. Lower layers first. */
export const LAYERS = {
  domain: [],
  telemetry: ['domain'],
  analysis: ['domain'],
  simulation: ['domain', 'analysis'],
  incidents: ['domain', 'analysis'],
  intake: ['domain'],
  pipeline: ['domain', 'analysis', 'incidents', 'intake'],
  redis: ['domain', 'analysis', 'incidents', 'intake', 'pipeline', 'notify', 'channels', 'telemetry'],
  charts: ['domain', 'analysis', 'pipeline'],
  render: ['domain', 'analysis', 'pipeline', 'charts', 'telemetry'],
  notify: ['domain', 'analysis', 'incidents', 'pipeline', 'charts', 'render', 'telemetry'],
  channels: ['domain', 'analysis', 'incidents', 'charts', 'render', 'notify', 'telemetry'],
  queue: ['domain', 'analysis', 'incidents', 'intake', 'pipeline', 'redis', 'charts', 'render', 'notify', 'channels', 'telemetry'],
  http: ['domain', 'analysis', 'incidents', 'intake', 'pipeline', 'charts', 'render', 'notify', 'channels', 'telemetry'],
  backtest: ['domain', 'analysis', 'simulation', 'incidents', 'intake', 'pipeline', 'charts', 'render', 'notify', 'channels', 'telemetry'],
  contracts: ['domain', 'analysis', 'incidents', 'intake', 'pipeline', 'charts', 'render', 'notify', 'channels', 'http', 'telemetry'],
  opcua: ['domain', 'analysis', 'incidents', 'intake', 'pipeline', 'notify', 'http', 'telemetry'],
  runtime: ['domain', 'analysis', 'incidents', 'intake', 'pipeline', 'redis', 'charts', 'render', 'notify', 'channels', 'queue', 'http', 'contracts', 'opcua', 'telemetry'],
  demo: ['domain', 'analysis', 'simulation', 'incidents', 'intake', 'pipeline', 'redis', 'charts', 'render', 'notify', 'channels', 'queue', 'http', 'telemetry', 'runtime', 'contracts', 'opcua'],
  cli: ['domain', 'analysis', 'simulation', 'incidents', 'intake', 'pipeline', 'redis', 'charts', 'render', 'notify', 'channels', 'queue', 'http', 'telemetry', 'runtime', 'contracts', 'opcua', 'backtest', 'demo'],
  board: [],
};

/** The layer map itself must be acyclic; checked when the rule loads. */
function assertAcyclic(layers) {
  const state = new Map();
  const visit = (name, path) => {
    if (state.get(name) === 'done') return;
    if (state.get(name) === 'open') throw new Error(`eslint/layers.js: the layers form a cycle: ${[...path, name].join(' → ')}`);
    state.set(name, 'open');
    for (const next of layers[name] ?? []) visit(next, [...path, name]);
    state.set(name, 'done');
  };
  for (const name of Object.keys(layers)) visit(name, []);
}
assertAcyclic(LAYERS);

const root = resolve(dirname(fileURLToPath(import.meta.url)), '..');

function folderOf(file) {
  const rel = relative(root, file).split(sep);
  if (rel[0] === 'src') return rel.length > 2 ? { area: 'src', folder: rel[1] } : { area: 'src', folder: null };
  return { area: rel[0], folder: null };
}

const allowedImports = {
  meta: { type: 'problem', docs: { description: 'imports follow the layers of src/ (eslint/layers.js)' }, schema: [] },
  create(context) {
    const file = context.filename;
    const from = folderOf(file);
    const check = (node, spec) => {
      if (typeof spec !== 'string' || !spec.startsWith('.')) return;
      const target = folderOf(resolve(dirname(file), spec));
      if (from.area === 'src' && target.area !== 'src') {
        context.report({ node, message: `src/ must not import from ${target.area}/ ("${spec}")` });
        return;
      }
      if (from.area === 'bench' && target.area === 'tests') {
        context.report({ node, message: `bench/ must not import from tests/ ("${spec}"); move what both need into src/ or bench/` });
        return;
      }
      if (from.area !== 'src' || from.folder === null || target.folder === null || target.folder === from.folder) return;
      const allowed = LAYERS[from.folder];
      if (allowed === undefined) {
        context.report({ node, message: `src/${from.folder}/ is not in eslint/layers.js; add it with the folders it may import from` });
      } else if (!allowed.includes(target.folder)) {
        context.report({ node, message: `src/${from.folder}/ may not import from src/${target.folder}/ ("${spec}"): that runs back up the layers (eslint/layers.js)` });
      }
    };
    return {
      ImportDeclaration: (node) => check(node, node.source.value),
      ExportNamedDeclaration: (node) => node.source && check(node, node.source.value),
      ExportAllDeclaration: (node) => check(node, node.source.value),
      ImportExpression: (node) => node.source.type === 'Literal' && check(node, node.source.value),
    };
  },
};

export default { rules: { 'allowed-imports': allowedImports } };
