#!/usr/bin/env node
// Outside-reference check of pftgw's HL7 v2.5.1 ORU^R01 output against the
// 2.5.1 data of npm hl7v2-dictionary 1.8.0 (pinned in package-lock.json):
// message structure ORU_R01 (segment order, groups, min/max), segment fields
// (type, optionality R, repetition, length), data-type components (length).
//
// Usage: node hl7_dictionary_check.mjs HL7_DIR...   (every *.hl7 in them, recursively)
//
// Checks per message:
//   - segment order and cardinality against dictionaries['2.5.1'].messages.ORU_R01
//     (greedy match; enough for ORU_R01, whose groups each start with a
//     segment that cannot belong to the group before);
//   - fields the dictionary marks opt 'R' are present; OBX-2 present when
//     OBX-5 is valued (interop-facts.md, from memory);
//   - repetitions within the field's `rep`; every repetition's length and
//     every component's / sub-component's length within the dictionary's
//     `len` (measured on the wire, escapes included: never under-counts);
//   - TS fields: YYYYMMDDHHMMSS[.S{1,4}]+/-ZZZZ with an offset. Exception:
//     PID-7 (date of birth) may be YYYYMMDD, a day-precision TS; adding a
//     time and an offset would invent precision;
//   - NM fields, and OBX-5 when OBX-2 is NM: bare decimals; SI fields: digits;
//   - table-coded fields we use: the dictionary 1.8.0 names the table of each
//     field (checked: OBX-2 0125, OBX-8 0078, OBX-11 0085, MSH-11 0103) but
//     ships no table values (only acknowledgment codes); the values below are
//     from memory of HL7 2.5.1 chapters 2 and 7, used unless the dictionary
//     has a table of its own. Project rule on top (DECISIONS.md): OBX-8 is
//     only L, H or N, never LL / HH / A / AA.
// Last line: "N passed, N failed"; exit status 1 on any failure or no input.
import { readdirSync, readFileSync } from 'node:fs';
import { join, relative } from 'node:path';
import { dictionaries } from 'hl7v2-dictionary';

const dict = dictionaries['2.5.1'];

// From memory (HL7 2.5.1): the dictionary carries the table numbers only.
const TABLES_FROM_MEMORY = {
  103: ['D', 'P', 'T'],
  125: ['AD', 'CE', 'CF', 'CK', 'CN', 'CP', 'CWE', 'CX', 'DT', 'DTM', 'ED', 'FT', 'ID', 'MO',
        'NM', 'PN', 'RP', 'SN', 'ST', 'TM', 'TN', 'TS', 'TX', 'XAD', 'XCN', 'XON', 'XPN', 'XTN'],
  78: ['L', 'H', 'LL', 'HH', '<', '>', 'N', 'A', 'AA', 'S', 'R', 'I', 'MS', 'VS', 'U', 'D', 'B',
       'W', 'NEG', 'POS'],
  85: ['C', 'D', 'F', 'I', 'N', 'O', 'P', 'R', 'S', 'U', 'W', 'X'],
};
const TABLE_FIELDS = [
  ['MSH', 11, 103],
  ['OBX', 2, 125],
  ['OBX', 8, 78],
  ['OBX', 11, 85],
];
const OBX8_ALLOWED = new Set(['L', 'H', 'N']); // DECISIONS.md, patient safety

const TS_RE = /^\d{14}(\.\d{1,4})?[+-]\d{4}$/;
const DATE_RE = /^\d{8}$/;
const NM_RE = /^[+-]?(\d+(\.\d*)?|\.\d+)$/;
const SI_RE = /^\d+$/;

function tableValues(number) {
  const own = dict.tables?.[number];
  if (Array.isArray(own)) return { values: own, source: 'hl7v2-dictionary 1.8.0' };
  return { values: TABLES_FROM_MEMORY[number], source: 'from memory' };
}

// Splits a segment into fields numbered as HL7 does (MSH-1 is the separator).
function fieldsOf(line) {
  const parts = line.split('|');
  if (parts[0] === 'MSH') parts.splice(1, 0, '|');
  return parts;
}

// ---- structure -------------------------------------------------------------
function children(def) {
  return Object.entries(def.segments || {})
    .map(([name, d]) => ({ name, ...d }))
    .sort((a, b) => a.idx - b.idx);
}

// Matches one repetition of group `def` at ids[pos]; returns the new position
// or -1 (nothing consumed / a required child missing).
function matchGroup(def, ids, pos, path, errors) {
  const start = pos;
  for (const child of children(def)) {
    const min = child.min ?? 0;
    const max = child.max ?? Infinity;
    let count = 0;
    while (count < max && pos < ids.length) {
      let next = -1;
      if (child.segments) next = matchGroup(child, ids, pos, `${path}/${child.name}`, errors);
      else if (ids[pos] === child.name) next = pos + 1;
      if (next <= pos) break;
      pos = next;
      count += 1;
    }
    if (count < min) {
      if (pos === start) return -1; // this group does not start here
      errors.push(`structure: ${path}/${child.name} needs ${min}, found ${count} (at segment ${pos + 1})`);
      return pos;
    }
  }
  return pos > start ? pos : -1;
}

function checkStructure(ids, errors) {
  const def = dict.messages.ORU_R01;
  const end = matchGroup(def, ids, 0, 'ORU_R01', errors);
  if (end < 0) errors.push('structure: message does not start as ORU_R01 (MSH ...)');
  else if (end < ids.length)
    errors.push(`structure: segment ${ids[end]} at position ${end + 1} not allowed there by ORU_R01`);
}

// ---- fields ----------------------------------------------------------------
function checkLength(label, text, len, errors) {
  if (typeof len === 'number' && len > 0 && text.length > len)
    errors.push(`${label}: length ${text.length} > ${len}`);
}

function checkComponents(label, rep, typeName, errors) {
  const type = dict.types[typeName];
  if (!type?.fields) return;
  rep.split('^').forEach((comp, i) => {
    const def = type.fields[String(i + 1)];
    if (!def) {
      if (comp !== '') errors.push(`${label}.${i + 1}: component not in ${typeName}`);
      return;
    }
    checkLength(`${label}.${i + 1}`, comp, def.len, errors);
    const sub = dict.types[def.type];
    if (sub?.fields)
      comp.split('&').forEach((s, j) => {
        const sdef = sub.fields[String(j + 1)];
        if (sdef) checkLength(`${label}.${i + 1}.${j + 1}`, s, sdef.len, errors);
        else if (s !== '') errors.push(`${label}.${i + 1}.${j + 1}: not in ${def.type}`);
      });
  });
}

function checkSegment(fields, errors) {
  const id = fields[0];
  const seg = dict.segments[id];
  if (!seg) {
    errors.push(`${id}: segment unknown to the 2.5.1 dictionary`);
    return;
  }
  const count = Math.max(fields.length - 1, ...Object.keys(seg.fields).map(Number));
  for (let n = 1; n <= count; n++) {
    const def = seg.fields[String(n)];
    const value = fields[n] ?? '';
    const label = `${id}-${n}`;
    if (!def) {
      if (value !== '') errors.push(`${label}: field not in the 2.5.1 ${id} segment`);
      continue;
    }
    if (def.opt === 'R' && value === '') errors.push(`${label}: required (${def.desc}) but empty`);
    if (value === '' || (id === 'MSH' && n <= 2)) continue;
    const reps = value.split('~');
    if (typeof def.rep === 'number' && reps.length > def.rep)
      errors.push(`${label}: ${reps.length} repetitions > ${def.rep}`);
    for (const rep of reps) {
      checkLength(label, rep, def.len, errors);
      checkComponents(label, rep, def.type, errors);
      const first = rep.split('^')[0];
      if (def.type === 'TS') {
        const birthDate = id === 'PID' && n === 7 && DATE_RE.test(first);
        if (!birthDate && !TS_RE.test(first))
          errors.push(`${label}: TS ${JSON.stringify(first)} is not YYYYMMDDHHMMSS[.S]+/-ZZZZ`);
      }
      if (def.type === 'NM' && !NM_RE.test(rep)) errors.push(`${label}: NM ${JSON.stringify(rep)}`);
      if (def.type === 'SI' && !SI_RE.test(rep)) errors.push(`${label}: SI ${JSON.stringify(rep)}`);
    }
  }
  if (id === 'OBX') {
    const type = fields[2] ?? '';
    const value = fields[5] ?? '';
    if (value !== '' && type === '') errors.push('OBX-2: empty while OBX-5 is valued');
    if (type === 'NM' && value !== '' && !NM_RE.test(value))
      errors.push(`OBX-5: NM ${JSON.stringify(value)} is not a bare decimal`);
    const flag = fields[8] ?? '';
    if (flag !== '' && !OBX8_ALLOWED.has(flag))
      errors.push(`OBX-8: ${flag} (project rule: only L, H, N; never LL/HH/A/AA)`);
  }
  for (const [sid, n, table] of TABLE_FIELDS) {
    if (sid !== id) continue;
    const def = seg.fields[String(n)];
    if (def?.table !== table)
      errors.push(`${id}-${n}: dictionary names table ${def?.table}, expected ${table}`);
    const value = fields[n] ?? '';
    if (value === '') continue;
    const { values, source } = tableValues(table);
    const code = value.split('^')[0];
    if (!values.includes(code))
      errors.push(`${id}-${n}: ${JSON.stringify(code)} not in table ${String(table).padStart(4, '0')} (${source})`);
  }
}

function checkMessage(text) {
  const errors = [];
  if (text.includes('\n')) {
    errors.push('message contains LF: segments must end in CR only');
    return errors; // the segments cannot be told apart reliably
  }
  if (!text.endsWith('\r')) errors.push('last segment does not end in CR');
  const lines = text.split('\r').filter((l) => l !== '');
  const all = lines.map(fieldsOf);
  checkStructure(all.map((f) => f[0]), errors);
  for (const f of all) checkSegment(f, errors);
  const msh = all[0] || [];
  if (msh[2] !== '^~\\&') errors.push(`MSH-2 ${JSON.stringify(msh[2])}: expected ^~\\&`);
  if (msh[9] !== 'ORU^R01^ORU_R01') errors.push(`MSH-9 ${JSON.stringify(msh[9])}`);
  if (msh[12] !== '2.5.1') errors.push(`MSH-12 ${JSON.stringify(msh[12])}`);
  if (!msh[10] || msh[10].length > 20) errors.push(`MSH-10 ${JSON.stringify(msh[10])}: 1..20 characters`);
  return errors;
}

// Every *.hl7 under dir (the CLI puts large batches into subfolders).
function hl7Files(dir) {
  return readdirSync(dir, { recursive: true, withFileTypes: true })
    .filter((e) => e.isFile() && e.name.endsWith('.hl7'))
    .map((e) => join(e.path ?? e.parentPath, e.name))
    .sort();
}

function main(argv) {
  if (argv.length < 1) {
    console.error('usage: node hl7_dictionary_check.mjs HL7_DIR...');
    console.log('0 passed, 1 failed');
    return 2;
  }
  let passed = 0;
  let failed = 0;
  let seen = 0;
  for (const dir of argv) {
    for (const file of hl7Files(dir)) {
      seen += 1;
      const name = join(dir, relative(dir, file));
      const errors = checkMessage(readFileSync(file, 'utf8'));
      if (errors.length) {
        failed += 1;
        for (const e of errors) console.log(`FAIL ${name}: ${e}`);
      } else {
        passed += 1;
        console.log(`ok   ${name}`);
      }
    }
  }
  if (!seen) {
    console.log(`no .hl7 files in ${argv.join(' ')}`);
    failed += 1;
  }
  console.log(`${passed} passed, ${failed} failed`);
  return failed ? 1 : 0;
}

process.exitCode = main(process.argv.slice(2));
