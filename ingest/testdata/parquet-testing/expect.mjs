#!/usr/bin/env node
// Writes, for each Parquet file of upstream/data (our copy of part of the
// Apache parquet-testing repository), the values of its columns as DuckDB
// reads them: an independent Parquet reader (C++), used by ingest's
// TestParquetTestingData as the expected values of the files that
// have no upstream description (*_expect.csv, *.md).
//
// Usage, from this folder:
//   npm ci
//   node expect.mjs upstream/data > expect.json
//
// For each file: its row count and, per leaf column that is not inside a
// repeated group, its path (dotted), DuckDB's type and its values as text:
// integers in decimal, booleans as true/false, strings as they are (binary
// read as text), timestamps and dates as nanoseconds since the Unix epoch
// (a date at midnight UTC), null as null. Columns of other types (floating
// point, decimal, fixed-length binary) get their type only.
//
// Skipped: the two corrupt files, which DuckDB should not be trusted to read,
// and int96_from_spark.parquet, whose values int96_from_spark.md gives.

import { readdirSync } from 'node:fs';
import { join, resolve } from 'node:path';
import { DuckDBInstance } from '@duckdb/node-api';

const SKIP = new Set([
  'datapage_v1-corrupt-checksum.parquet',
  'nation.dict-malformed.parquet',
  'int96_from_spark.parquet',
]);

const dir = resolve(process.argv[2] ?? 'upstream/data');
const db = await DuckDBInstance.create(':memory:');
const con = await db.connect();

const q = (s) => `'${s.replaceAll("'", "''")}'`;
const ident = (s) => `"${s.replaceAll('"', '""')}"`;

async function rows(sql) {
  const r = await con.runAndReadAll(sql);
  return r.getRowObjectsJS();
}

// leaves returns the leaf columns of the file's Parquet schema with their
// paths, from parquet_schema's depth-first list of schema elements.
async function leaves(file) {
  const els = await rows(`SELECT name, type, repetition_type, num_children FROM parquet_schema(${q(file)})`);
  const out = [];
  // stack of [name, children left, repeated]
  const stack = [];
  for (let i = 0; i < els.length; i++) {
    const e = els[i];
    const kids = Number(e.num_children ?? 0);
    if (i === 0) { // the root
      stack.push(['', kids, false]);
      continue;
    }
    const parent = stack[stack.length - 1];
    parent[1]--;
    const path = [...stack.slice(1).map((s) => s[0]), e.name];
    const repeated = stack.some((s) => s[2]) || e.repetition_type === 'REPEATED';
    if (kids > 0) {
      stack.push([e.name, kids, repeated]);
    } else {
      out.push({ path, repeated });
      while (stack.length > 1 && stack[stack.length - 1][1] === 0) stack.pop();
    }
  }
  return out;
}

const result = {};
for (const name of readdirSync(dir).filter((f) => f.endsWith('.parquet')).sort()) {
  if (SKIP.has(name)) continue;
  const file = join(dir, name);
  try {
    result[name] = await describe(file);
  } catch (e) {
    // Recorded, so that the test knows DuckDB could not read the file.
    result[name] = { error: String(e.message ?? e).split('\n')[0] };
  }
}

async function describe(file) {
  const src = `read_parquet(${q(file)}, binary_as_string = true)`;
  const count = Number((await rows(`SELECT count(*) AS n FROM ${src}`))[0].n);
  const cols = [];
  for (const leaf of await leaves(file)) {
    if (leaf.repeated) continue;
    const expr = leaf.path.map(ident).join('.');
    const type = (await rows(`SELECT typeof(${expr}) AS t FROM ${src} LIMIT 1`))[0]?.t ?? 'NULL';
    let text = null;
    if (/^(TINYINT|SMALLINT|INTEGER|BIGINT|UTINYINT|USMALLINT|UINTEGER|UBIGINT|BOOLEAN|VARCHAR)$/.test(type)) {
      text = `CAST(${expr} AS VARCHAR)`;
    } else if (/^(TIMESTAMP.*|DATE)$/.test(type)) {
      text = `CAST(epoch_ns(CAST(${expr} AS TIMESTAMP_NS)) AS VARCHAR)`;
    }
    const col = { path: leaf.path.join('.'), type };
    if (text) {
      // file_row_number keeps the file's row order.
      const vals = await rows(`SELECT ${text} AS v FROM read_parquet(${q(file)}, binary_as_string = true, file_row_number = true) ORDER BY file_row_number`);
      col.values = vals.map((r) => r.v);
    }
    cols.push(col);
  }
  return { rows: count, columns: cols };
}
const version = (await rows('SELECT version() AS v'))[0].v;
// One line per column, so that a change shows as a small diff.
const out = [`{"reader": ${JSON.stringify(`DuckDB ${version}`)}, "files": {`];
const names = Object.keys(result);
names.forEach((name, i) => {
  const f = result[name];
  const end = i === names.length - 1 ? '' : ',';
  if (f.error) {
    out.push(` ${JSON.stringify(name)}: {"error": ${JSON.stringify(f.error)}}${end}`);
    return;
  }
  out.push(` ${JSON.stringify(name)}: {"rows": ${f.rows}, "columns": [`);
  f.columns.forEach((c, j) => out.push(`  ${JSON.stringify(c)}${j === f.columns.length - 1 ? '' : ','}`));
  out.push(` ]}${end}`);
});
out.push('}}');
process.stdout.write(out.join('\n') + '\n');
