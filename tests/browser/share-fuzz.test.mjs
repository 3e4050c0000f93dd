// A short run of the share-link fuzz harness (the long run: node tests/fuzz/share_link.mjs 1000000),
// and the link's checksum and base64url against Node's own zlib.crc32 and Buffer on random data.

import { test } from "node:test";
import assert from "node:assert/strict";
import { execFile } from "node:child_process";
import { promisify } from "node:util";
import { join } from "node:path";
import { crc32 } from "node:zlib";
import { ROOT, requireBuilt } from "./helpers.mjs";
import { loadReader } from "../fuzz/share_link.mjs";

const run = promisify(execFile);

// Behaviour only, with a fixed seed: the time per input is reported here and judged by the
// long run (node tests/fuzz/share_link.mjs 1000000), not by a test.
test("share-link fuzz, short run: every input gives a workspace or clear problems", async () => {
  requireBuilt();
  const { stdout } = await run(process.execPath, [join(ROOT, "tests/fuzz/share_link.mjs"), "3000", "--seed", "11", "--no-time-limit"], { cwd: ROOT, maxBuffer: 16 * 1024 * 1024 }).catch((e) => {
    throw new Error(`the harness failed (exit ${e.code}): ${e.stdout}\n${e.stderr}`);
  });
  const counts = JSON.parse(stdout);
  console.log(`share-link fuzz: ${JSON.stringify({ ...counts, byProblem: undefined })}`);
  assert.equal(counts.inputs, 3005);
  assert.equal(counts.escaped, 0);
  assert.ok(counts.accepted > 0 && counts.rejected > 1000, "both outcomes were reached");
  assert.ok(Object.keys(counts.byProblem).length >= 8, `kinds of problems: ${Object.keys(counts.byProblem)}`);
});

test("the link's CRC-32 and base64url equal Node's zlib.crc32 and Buffer base64url on random data", async () => {
  requireBuilt();
  const reader = await loadReader();
  let s = 12345;
  const rnd = () => ((s = (Math.imul(s, 1103515245) + 12345) >>> 0) / 2 ** 32);
  for (let n = 0; n < 500; n++) {
    const bytes = new Uint8Array(Math.floor(rnd() * (n < 50 ? 8 : 3000)));
    for (let i = 0; i < bytes.length; i++) bytes[i] = Math.floor(rnd() * 256);
    assert.equal(reader.crc32(bytes), crc32(bytes), `crc32 of ${bytes.length} bytes`);
    const text = reader.toBase64url(bytes);
    assert.equal(text, Buffer.from(bytes).toString("base64url"));
    assert.deepEqual(Buffer.from(reader.fromBase64url(text)), Buffer.from(bytes));
  }
  // Lengths and characters base64url does not allow.
  // ("AB": the unused low bits of the last character, 0001, are not zero; RFC 4648, section 3.5.)
  for (const bad of ["A", "AAAAA", "AB*C", "AB=C", "AB C", "é", "AB"]) assert.equal(reader.fromBase64url(bad), null, bad);
  assert.deepEqual([...reader.fromBase64url("AA")], [0]);
});
