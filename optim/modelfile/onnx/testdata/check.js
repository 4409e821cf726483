// Runs ONNX models exported by rhomb in onnxruntime-node, an independent
// runtime, for optim/modelfile/onnx's Go test (runtime_test.go), which does the
// comparing: this script only runs the models and writes what came out.
//
//	usage: NODE_PATH=PREFIX/node_modules node check.js DIR
//
// DIR/cases.json lists the cases: {"name", "model" (a file in DIR),
// "inputs": [{"name", "dims", "file"}]}. Each input
// file holds little-endian float32 values, row-major (raw binary, so that
// NaN, which JSON cannot write, passes through). The outputs of every
// case go to DIR/results.json as {name: {output: {"type", "dims",
// "data"}}}; float32 values are written as JS numbers, which hold them
// exactly, and int64 values as numbers too (class indices are small).
// Every model runs twice: as written (graph optimizations disabled, under
// the case's name) and as a user's session would run it by default (all
// optimizations, under name + "@optimized"), since the runtime may fuse
// or rewrite nodes.
'use strict';

const fs = require('fs');
const path = require('path');
const ort = require('onnxruntime-node');

async function main() {
  const dir = process.argv[2];
  if (!dir) {
    throw new Error('usage: node check.js DIR');
  }
  const cases = JSON.parse(fs.readFileSync(path.join(dir, 'cases.json'), 'utf8'));
  const results = {};
  for (const c of cases) {
    for (const [suffix, level] of [['', 'disabled'], ['@optimized', 'all']]) {
      results[c.name + suffix] = await run(dir, c, level);
    }
  }
  fs.writeFileSync(path.join(dir, 'results.json'), JSON.stringify(results));
  console.log(`ran ${cases.length} models in onnxruntime-node ${require('onnxruntime-node/package.json').version}`);
}

async function run(dir, c, level) {
  const session = await ort.InferenceSession.create(path.join(dir, c.model), {
    executionProviders: ['cpu'],
    graphOptimizationLevel: level,
  });
  const feeds = {};
  for (const inp of c.inputs) {
    const buf = fs.readFileSync(path.join(dir, inp.file));
    const data = new Float32Array(buf.buffer.slice(buf.byteOffset, buf.byteOffset + buf.byteLength));
    feeds[inp.name] = new ort.Tensor('float32', data, inp.dims);
  }
  const out = await session.run(feeds);
  const got = {};
  for (const [name, t] of Object.entries(out)) {
    got[name] = { type: t.type, dims: t.dims, data: Array.from(t.data, Number) };
  }
  return got;
}

main().catch((e) => {
  console.error(e && e.stack ? e.stack : String(e));
  process.exit(1);
});
