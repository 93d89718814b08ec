// Validates the neutral JSON samples (and each line of the .jsonl archive)
// against schemas/pftgw-result-1.0.schema.json with ajv 8.17.1 + ajv-formats
// 3.0.1 (npm, pinned in package-lock.json): the outside reference for JSON
// Schema draft 2020-12. The bad-schema-* samples must be refused. With a pftgw
// binary as argument, its `convert --to neutral-json` output of every sample is
// validated too. Last line: "N passed, N failed"; exit 1 on any failure.
import Ajv2020 from "ajv/dist/2020.js";
import addFormats from "ajv-formats";
import { execFileSync } from "node:child_process";
import fs from "node:fs";
import os from "node:os";
import path from "node:path";
import { fileURLToPath } from "node:url";

const root = path.resolve(path.dirname(fileURLToPath(import.meta.url)), "../..");
const schema = JSON.parse(fs.readFileSync(path.join(root, "schemas/pftgw-result-1.0.schema.json"), "utf8"));
const ajv = new Ajv2020({ allErrors: true, strict: true });
addFormats(ajv);
const validate = ajv.compile(schema);

let passed = 0;
let failed = 0;
function check(label, text, expectValid) {
  let ok = false;
  let why = "";
  try {
    ok = validate(JSON.parse(text));
    why = ok ? "" : ajv.errorsText(validate.errors);
  } catch (e) {
    why = `not JSON: ${e.message}`;
  }
  if (ok === expectValid) {
    passed++;
    console.log(`ok   ${label}${expectValid ? "" : " (refused: " + why.slice(0, 120) + ")"}`);
  } else {
    failed++;
    console.log(`FAIL ${label}: ${expectValid ? why : "accepted, but it must be refused"}`);
  }
}

const goodFiles = [];
for (const dir of ["samples/lab", "samples/examples"]) {
  for (const name of fs.readdirSync(path.join(root, dir)).sort()) {
    const file = path.join(root, dir, name);
    if (name.endsWith(".json")) {
      const bad = name.startsWith("bad-schema-");
      check(`${dir}/${name}`, fs.readFileSync(file, "utf8"), !bad);
      if (!bad) goodFiles.push(file);
    } else if (name.endsWith(".jsonl")) {
      fs.readFileSync(file, "utf8").split("\n").forEach((line, i) => {
        if (line.trim()) check(`${dir}/${name}:${i + 1}`, line, true);
      });
      goodFiles.push(file);
    } else if (name.endsWith(".xml") && !name.startsWith("bad-schema-")) {
      goodFiles.push(file);
    }
  }
}

const binary = process.argv[2];
if (binary) {
  const out = fs.mkdtempSync(path.join(os.tmpdir(), "pftgw-json-"));
  let ran = true;
  try {
    execFileSync(binary, ["convert", "--to", "neutral-json", "--out", out, ...goodFiles], { stdio: "pipe" });
  } catch (e) {
    // Exit 1 means some results were blocked by findings (the bad-* samples); the rest are written.
    if (e.status !== 1) {
      ran = false;
      console.log(`note: ${binary} convert failed (status ${e.status}); written forms not checked`);
    }
  }
  if (ran) {
    const written = [];
    const walk = (d) => fs.readdirSync(d, { withFileTypes: true }).forEach((e) =>
      e.isDirectory() ? walk(path.join(d, e.name)) : e.name.endsWith(".json") && e.name !== "summary.json" && written.push(path.join(d, e.name)));
    walk(out);
    if (written.length === 0) { failed++; console.log("FAIL convert wrote no .json file"); }
    for (const f of written.sort()) check(`written ${path.relative(out, f)}`, fs.readFileSync(f, "utf8"), true);
  }
  fs.rmSync(out, { recursive: true, force: true });
}

console.log(`${passed} passed, ${failed} failed`);
process.exit(failed === 0 ? 0 : 1);
