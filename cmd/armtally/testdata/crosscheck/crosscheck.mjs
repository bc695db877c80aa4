#!/usr/bin/env node
// Independent cross-check of armtally's per-arm counts, computed in DuckDB SQL.
//
// Usage:
//   node crosscheck.mjs --file LOG.parquet --experiment KEY --exposure-event EV
//     --control NAME --start RFC3339 --end RFC3339
//     --metric name=event[,event...]:window_seconds [--metric ...] [--threads 2]
//
// Semantics (multi-arm policy "exclude", maturity policy "exclude"):
//   * valid rows have a non-null, non-empty user_id and a non-null ts;
//   * exposure rows: event = EV and experiment = KEY, counted only when
//     start <= ts < end (rows without an arm are not usable exposures);
//   * t0 = earliest in-window exposure of the unit, arm = that row's arm;
//   * a unit exposed in-window in 2+ distinct arms is multi-arm and dropped;
//   * per metric with window W: immature when t0 + W > end (left out of the
//     metric's units); otherwise it converts when some row of the unit has an
//     event in the metric's set with t0 <= ts < t0 + W and ts < end.
// Times are compared as integer microseconds since the Unix epoch.
//
// stdout: one JSON object with the counts. stderr: diagnostics and timing.

import { parseArgs } from 'node:util';
import { existsSync } from 'node:fs';
import { DuckDBInstance } from '@duckdb/node-api';

const USAGE = `usage: node crosscheck.mjs --file LOG.parquet --experiment KEY --exposure-event EV \\
  --control NAME --start RFC3339 --end RFC3339 \\
  --metric name=event[,event...]:window_seconds [--metric ...] [--threads 2]`;

function fail(msg) {
  process.stderr.write(`crosscheck: ${msg}\n${USAGE}\n`);
  process.exit(2);
}

function parseMetric(spec) {
  const eq = spec.indexOf('=');
  const colon = spec.lastIndexOf(':');
  if (eq <= 0 || colon < eq + 2) fail(`bad --metric ${JSON.stringify(spec)}`);
  const name = spec.slice(0, eq);
  const events = spec.slice(eq + 1, colon).split(',').map((s) => s.trim());
  const win = spec.slice(colon + 1).trim();
  if (events.some((e) => e === '')) fail(`empty event name in --metric ${JSON.stringify(spec)}`);
  if (!/^[0-9]+$/.test(win)) fail(`window must be a whole number of seconds in --metric ${JSON.stringify(spec)}`);
  const windowSeconds = BigInt(win);
  if (windowSeconds <= 0n) fail(`window must be positive in --metric ${JSON.stringify(spec)}`);
  return { name, events: [...new Set(events)], windowUs: windowSeconds * 1000000n };
}

// Checks the shape of an RFC 3339 timestamp (date, time, and Z or an offset).
const RFC3339 = /^\d{4}-\d{2}-\d{2}[Tt ]\d{2}:\d{2}:\d{2}(\.\d+)?([Zz]|[+-]\d{2}:\d{2})$/;

const { values: opts } = (() => {
  try {
    return parseArgs({
      options: {
        file: { type: 'string' },
        experiment: { type: 'string' },
        'exposure-event': { type: 'string' },
        control: { type: 'string' },
        start: { type: 'string' },
        end: { type: 'string' },
        metric: { type: 'string', multiple: true },
        threads: { type: 'string', default: '2' },
        help: { type: 'boolean', short: 'h' },
      },
      strict: true,
      allowPositionals: false,
    });
  } catch (err) {
    fail(err.message);
  }
})();

if (opts.help) {
  process.stdout.write(USAGE + '\n');
  process.exit(0);
}
for (const k of ['file', 'experiment', 'exposure-event', 'control', 'start', 'end']) {
  if (opts[k] === undefined || opts[k] === '') fail(`--${k} is required`);
}
if (!opts.metric || opts.metric.length === 0) fail('at least one --metric is required');
if (!existsSync(opts.file)) fail(`no such file: ${opts.file}`);
for (const k of ['start', 'end']) {
  if (!RFC3339.test(opts[k])) fail(`--${k} is not RFC 3339: ${opts[k]}`);
}
if (!/^[1-9][0-9]*$/.test(opts.threads)) fail(`--threads must be a positive integer`);

const metrics = opts.metric.map(parseMetric);
{
  const seen = new Set();
  for (const m of metrics) {
    if (seen.has(m.name)) fail(`metric ${m.name} given twice`);
    seen.add(m.name);
  }
}

const sqlString = (s) => `'${String(s).replaceAll("'", "''")}'`;
const num = (v) => {
  if (typeof v === 'bigint') {
    if (v > BigInt(Number.MAX_SAFE_INTEGER)) throw new Error(`count too large: ${v}`);
    return Number(v);
  }
  return v === null ? 0 : Number(v);
};
// Byte-wise (UTF-8) ordering, independent of locale.
const byteCompare = (a, b) => Buffer.compare(Buffer.from(a, 'utf8'), Buffer.from(b, 'utf8'));

const t0Wall = process.hrtime.bigint();
const instance = await DuckDBInstance.create(':memory:', { threads: opts.threads });
const con = await instance.connect();
await con.run(`SET TimeZone = 'UTC'`);

const all = async (sql, params) => (await con.runAndReadAll(sql, params)).getRowObjects();

// Window bounds as epoch microseconds, parsed by DuckDB.
const [bounds] = await all(
  `SELECT epoch_us($s::TIMESTAMPTZ) AS s_us, epoch_us($e::TIMESTAMPTZ) AS e_us`,
  { s: opts.start, e: opts.end },
);
const startUs = bounds.s_us;
const endUs = bounds.e_us;
if (!(startUs < endUs)) fail('--start must be before --end');

// Metric definitions.
await con.run(`CREATE TEMP TABLE metric_def (ord INTEGER, metric VARCHAR, window_us BIGINT)`);
await con.run(`CREATE TEMP TABLE metric_event (metric VARCHAR, event VARCHAR)`);
for (const [i, m] of metrics.entries()) {
  await con.run(`INSERT INTO metric_def VALUES ($1, $2, $3)`, [i, m.name, m.windowUs]);
  for (const ev of m.events) {
    await con.run(`INSERT INTO metric_event VALUES ($1, $2)`, [m.name, ev]);
  }
}

// Valid rows of the log, with time as epoch microseconds.
await con.run(`
  CREATE TEMP VIEW log AS
  SELECT user_id AS u, epoch_us(ts) AS t, event, experiment, arm
  FROM read_parquet(${sqlString(opts.file)})
  WHERE user_id IS NOT NULL AND user_id <> '' AND ts IS NOT NULL`);

const P = { key: opts.experiment, ev: opts['exposure-event'], s: startUs, e: endUs };

// One row per unit with at least one usable in-window exposure.
await con.run(
  `CREATE TEMP TABLE unit AS
   SELECT u,
          min(t)                    AS t0,
          arg_min(arm, t)           AS arm,
          count(DISTINCT arm)       AS n_arms
   FROM log
   WHERE event = $ev AND experiment = $key
     AND arm IS NOT NULL AND arm <> ''
     AND t >= $s AND t < $e
   GROUP BY u`,
  P,
);

// Per (arm, metric) tallies over single-arm units.
const tallies = await all(
  `WITH analysed AS (
     SELECT u, t0, arm FROM unit WHERE n_arms = 1
   ),
   unit_metric AS (
     SELECT a.u, a.arm, a.t0, d.metric, d.window_us,
            (a.t0 + d.window_us > $e) AS immature
     FROM analysed a CROSS JOIN metric_def d
   ),
   metric_rows AS (
     SELECT l.u, l.t, me.metric
     FROM log l JOIN metric_event me ON l.event = me.event
     WHERE l.t < $e
   ),
   converted AS (
     SELECT DISTINCT um.u, um.metric
     FROM unit_metric um
     JOIN metric_rows r ON r.u = um.u AND r.metric = um.metric
     WHERE NOT um.immature
       AND r.t >= um.t0 AND r.t < um.t0 + um.window_us
   )
   SELECT um.arm, um.metric,
          count(*) FILTER (WHERE NOT um.immature)                   AS units,
          count(*) FILTER (WHERE c.u IS NOT NULL)                   AS conversions,
          count(*) FILTER (WHERE um.immature)                       AS immature
   FROM unit_metric um
   LEFT JOIN converted c ON c.u = um.u AND c.metric = um.metric
   GROUP BY um.arm, um.metric`,
  { e: endUs },
);

const armUnits = await all(
  `SELECT arm, count(*) AS units FROM unit WHERE n_arms = 1 GROUP BY arm`,
);
const armsSeen = await all(
  `SELECT DISTINCT arm FROM log
   WHERE event = $ev AND experiment = $key
     AND arm IS NOT NULL AND arm <> '' AND t >= $s AND t < $e`,
  P,
);
const [totals] = await all(
  `SELECT count(*) AS units_exposed,
          count(*) FILTER (WHERE n_arms > 1) AS multi_arm_units
   FROM unit`,
);
const [diag] = await all(
  `SELECT
     (SELECT count(*) FROM read_parquet(${sqlString(opts.file)})) AS rows_read,
     count(*) FILTER (WHERE event = $ev AND experiment = $key) AS exposure_rows,
     count(*) FILTER (WHERE event = $ev AND experiment = $key
                        AND (t < $s OR t >= $e)) AS exposure_rows_outside_window,
     count(*) FILTER (WHERE event = $ev AND experiment = $key
                        AND (arm IS NULL OR arm = '')) AS exposure_rows_without_arm
   FROM log`,
  P,
);

// Assemble the output: every arm seen on an in-window exposure, sorted by name.
const armNames = armsSeen.map((r) => r.arm).sort(byteCompare);
const unitsByArm = new Map(armUnits.map((r) => [r.arm, num(r.units)]));
const tallyKey = (arm, metric) => JSON.stringify([arm, metric]);
const tallyMap = new Map(tallies.map((r) => [tallyKey(r.arm, r.metric), r]));

const out = {
  arms: armNames.map((arm) => ({
    arm,
    units: unitsByArm.get(arm) ?? 0,
    metrics: metrics.map((m) => {
      const r = tallyMap.get(tallyKey(arm, m.name));
      return {
        metric: m.name,
        units: r ? num(r.units) : 0,
        conversions: r ? num(r.conversions) : 0,
        immature: r ? num(r.immature) : 0,
      };
    }),
  })),
  multi_arm_units: num(totals.multi_arm_units),
  units_exposed: num(totals.units_exposed),
};

process.stdout.write(JSON.stringify(out, null, 2) + '\n');

const seconds = Number(process.hrtime.bigint() - t0Wall) / 1e9;
const notes = {
  rows_read: num(diag.rows_read),
  valid_rows_exposure: num(diag.exposure_rows),
  exposure_rows_outside_window: num(diag.exposure_rows_outside_window),
  exposure_rows_without_arm: num(diag.exposure_rows_without_arm),
  threads: Number(opts.threads),
  seconds: Number(seconds.toFixed(3)),
};
process.stderr.write(`crosscheck: ${JSON.stringify(notes)}\n`);
if (!armNames.includes(opts.control)) {
  process.stderr.write(`crosscheck: warning: control arm ${JSON.stringify(opts.control)} has no in-window exposures\n`);
}

con.closeSync?.();
instance.closeSync?.();
