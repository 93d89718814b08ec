#!/usr/bin/env node
// Outside-reference check of the UCUM unit strings pftgw uses, against npm
// @lhncbc/ucum-lhc 7.1.10 (pinned in package-lock.json).
//
// Usage: node ucum_check.mjs [FOLDER...]
//
// Checks:
//   - every unit in schemas/quantities.csv (canonical_unit, accepted_units,
//     traditional_unit) is valid UCUM: validateUnitString says 'valid' and gives
//     back the same code (no substitution);
//   - every UCUM unit written in the given output folders, recursively: FHIR JSON
//     Quantities with system http://unitsofmeasure.org (valueQuantity.code,
//     referenceRange low / high), and in .hl7 files every OBX-6 whose third
//     component is UCUM (its first component is the unit code); a folder given
//     but holding no unit is a failure, so an empty run cannot pass;
//   - kPa <-> mm[Hg]: ucum-lhc's conversion of 1 mm[Hg] to kPa agrees with the
//     core's constant kKpaPerMmHg (gateway/core/units.hpp, read from the header)
//     to 1e-9 relative; UCUM defines 1 mm[Hg] = 133.3220 Pa (ucum-lhc's data);
//   - "mL/min/mmHg" is reported invalid (mmHg is not UCUM; mm[Hg] is;
//     lung-function-facts.md, flag V).
// Last line: "N passed, N failed"; exit status 1 on any failure.
import { readdirSync, readFileSync, statSync, existsSync } from 'node:fs';
import { join, relative, dirname } from 'node:path';
import { fileURLToPath } from 'node:url';
import { createRequire } from 'node:module';
import { parse } from 'csv-parse/sync';

const here = dirname(fileURLToPath(import.meta.url));
const root = join(here, '../..');
const require = createRequire(import.meta.url);
const ucum = require('@lhncbc/ucum-lhc').UcumLhcUtils.getInstance();
const UCUM_URI = 'http://unitsofmeasure.org';

let passed = 0;
let failed = 0;
function check(ok, what) {
  if (ok) passed += 1;
  else {
    failed += 1;
    console.log(`FAIL ${what}`);
  }
  return ok;
}

const verdicts = new Map();
function validUcum(unit) {
  if (!verdicts.has(unit)) {
    const r = ucum.validateUnitString(unit, false);
    verdicts.set(unit, r.status === 'valid' && r.ucumCode === unit ? null : `${r.status}: ${r.msg?.join(' ')}`);
  }
  return verdicts.get(unit);
}

// ---- the quantity table ------------------------------------------------------

const rows = parse(readFileSync(join(root, 'schemas/quantities.csv'), 'utf8'), {
  columns: true,
  skip_empty_lines: true,
});
check(rows.length > 0, 'schemas/quantities.csv has no rows');
const tableUnits = new Set();
for (const row of rows) {
  for (const u of [row.canonical_unit, row.traditional_unit, ...row.accepted_units.split(/\s+/)])
    if (u) tableUnits.add(u);
}
for (const u of [...tableUnits].sort()) {
  const problem = validUcum(u);
  check(problem === null, `quantities.csv unit "${u}" is not valid UCUM (${problem})`);
}

// ---- the output folders ------------------------------------------------------

function walk(dir, out = []) {
  for (const name of readdirSync(dir).sort()) {
    const p = join(dir, name);
    if (statSync(p).isDirectory()) walk(p, out);
    else out.push(p);
  }
  return out;
}

function fhirUnits(node, out) {
  if (Array.isArray(node)) node.forEach((n) => fhirUnits(n, out));
  else if (node && typeof node === 'object') {
    if (node.system === UCUM_URI && typeof node.code === 'string') out.push(node.code);
    for (const v of Object.values(node)) fhirUnits(v, out);
  }
}

// HL7 v2 escapes (2.5.1 chapter 2, interop-facts.md): \F\ \S\ \T\ \R\ \E\.
function hl7Unescape(text, d) {
  const map = { F: d.field, S: d.component, T: d.subcomponent, R: d.repetition, E: d.escape };
  const e = d.escape.replace(/[.*+?^${}()|[\]\\]/g, '\\$&');
  return text.replace(new RegExp(`${e}([FSTRE])${e}`, 'g'), (_, k) => map[k]);
}

function hl7Units(text, out) {
  for (const segment of text.split(/\r\n|\r|\n/)) {
    if (!segment.startsWith('MSH') && !segment.startsWith('OBX')) continue;
    if (segment.startsWith('MSH')) {
      hl7Units.d = {
        field: segment[3],
        component: segment[4],
        repetition: segment[5],
        escape: segment[6],
        subcomponent: segment[7],
      };
      continue;
    }
    const d = hl7Units.d ?? { field: '|', component: '^', repetition: '~', escape: '\\', subcomponent: '&' };
    const fields = segment.split(d.field);
    const obx6 = fields[6] ?? '';
    if (!obx6) continue;
    const parts = obx6.split(d.component).map((p) => hl7Unescape(p, d));
    if (parts[2] === 'UCUM') out.push(parts[0]);
  }
}

for (const folder of process.argv.slice(2)) {
  if (!check(existsSync(folder), `folder ${folder} does not exist`)) continue;
  let count = 0;
  for (const file of walk(folder)) {
    const name = relative(folder, file);
    const units = [];
    try {
      if (file.endsWith('summary.json')) continue;  // pftgw convert's run summary
      if (file.endsWith('.json')) fhirUnits(JSON.parse(readFileSync(file, 'utf8')), units);
      else if (file.endsWith('.hl7')) hl7Units(readFileSync(file, 'utf8'), units);
      else continue;
    } catch (e) {
      check(false, `${name}: could not be read (${e.message})`);
      continue;
    }
    count += units.length;
    const bad = [...new Set(units)].filter((u) => validUcum(u) !== null);
    check(bad.length === 0, `${folder}/${name}: not valid UCUM: ${bad.join(', ')}`);
  }
  check(count > 0, `${folder}: no UCUM unit found in any .json or .hl7 file`);
}

// ---- conversions and known invalid spellings ---------------------------------

const unitsHeader = readFileSync(join(root, 'gateway/core/units.hpp'), 'utf8');
const m = unitsHeader.match(/kKpaPerMmHg\s*=\s*([0-9.eE+-]+)/);
if (check(m !== null, 'gateway/core/units.hpp: kKpaPerMmHg not found')) {
  const core = Number(m[1]);
  const toKpa = ucum.convertUnitTo('mm[Hg]', 1, 'kPa');
  check(toKpa.status === 'succeeded' && Math.abs(toKpa.toVal - core) <= 1e-9 * core,
        `1 mm[Hg] = ${toKpa.toVal} kPa by UCUM; core kKpaPerMmHg = ${core}`);
  const toMmHg = ucum.convertUnitTo('kPa', 1, 'mm[Hg]');
  check(toMmHg.status === 'succeeded' && Math.abs(toMmHg.toVal * core - 1) <= 1e-9,
        `1 kPa = ${toMmHg.toVal} mm[Hg] by UCUM; 1 / core kKpaPerMmHg = ${1 / core}`);
}
check(validUcum('mL/min/mmHg') !== null, '"mL/min/mmHg" was accepted as UCUM; it is not');
check(validUcum('mL/min/mm[Hg]') === null, '"mL/min/mm[Hg]" was refused');

console.log(`${passed} passed, ${failed} failed`);
process.exit(failed === 0 ? 0 : 1);
