#!/usr/bin/env node
// A Node.js client of the real riskbound-server: the .proto files of proto/
// loaded at run time (@grpc/proto-loader), calls through @grpc/grpc-js, the
// error details decoded with protobufjs from proto/google/rpc/.
//
// Usage: node client_test.js --address 127.0.0.1:PORT --proto DIR
// (run_node_client_test.py starts the server and passes both). Exits 0 when
// every check passes, 1 otherwise, printing one line per check.
'use strict';

const assert = require('node:assert/strict');
const path = require('node:path');
const grpc = require('@grpc/grpc-js');
const protoLoader = require('@grpc/proto-loader');
const protobuf = require('protobufjs');

function argument(name) {
  const i = process.argv.indexOf(name);
  if (i < 0 || i + 1 >= process.argv.length) {
    console.error(`usage: node client_test.js --address HOST:PORT --proto DIR (missing ${name})`);
    process.exit(2);
  }
  return process.argv[i + 1];
}

const address = argument('--address');
const protoDir = argument('--proto');

// Field names as in the .proto files (snake_case), 64-bit integers as
// strings, enums by name, defaults filled in, the set oneof named.
const definition = protoLoader.loadSync('riskbound/v1/riskbound.proto', {
  includeDirs: [protoDir],
  keepCase: true,
  longs: String,
  enums: String,
  defaults: true,
  oneofs: true,
});
const riskbound = grpc.loadPackageDefinition(definition).riskbound.v1;
const client = new riskbound.RiskBound(address, grpc.credentials.createInsecure());

// The error-detail messages, from the project's copies of google/rpc (field
// names kept as in the .proto files, as above).
const rpcTypes = new protobuf.Root().loadSync([
  path.join(protoDir, 'google/rpc/status.proto'),
  path.join(protoDir, 'google/rpc/error_details.proto'),
], { keepCase: true });
const Status = rpcTypes.lookupType('google.rpc.Status');
const detailTypes = {
  'type.googleapis.com/google.rpc.BadRequest': rpcTypes.lookupType('google.rpc.BadRequest'),
  'type.googleapis.com/google.rpc.ErrorInfo': rpcTypes.lookupType('google.rpc.ErrorInfo'),
};

// One unary call: resolves to {answer, requestId} or rejects with the
// grpc-js error (code, details, metadata with the trailers).
function call(method, request, requestId) {
  const metadata = new grpc.Metadata();
  if (requestId !== undefined) metadata.set('x-request-id', requestId);
  return new Promise((resolve, reject) => {
    let echoed;
    const pending = client[method](request, metadata, { deadline: Date.now() + 10000 },
      (err, answer) => (err ? reject(err) : resolve({ answer, requestId: echoed })));
    pending.on('metadata', (m) => { echoed = m.get('x-request-id')[0]; });
  });
}

// The google.rpc.Status of a failed call's grpc-status-details-bin trailer,
// with each detail decoded by its type URL.
function errorDetails(err) {
  const raw = err.metadata.get('grpc-status-details-bin')[0];
  assert.ok(Buffer.isBuffer(raw), 'grpc-status-details-bin trailer present');
  const status = Status.toObject(Status.decode(raw), { longs: String });
  const details = {};
  for (const any of status.details) {
    const type = detailTypes[any.type_url];
    if (type) details[any.type_url] = type.toObject(type.decode(any.value));
  }
  return { status, details };
}

const checks = [];
function check(name, body) { checks.push({ name, body }); }

check('Certify: zero errors on 300 hold-out samples', async () => {
  const { answer, requestId } = await call('Certify', {
    evidence: { holdout: { error_count: 0, sample_count: 300 } },
    failure_probability: 0.05,
  });
  // Source: Clopper & Pearson (1934) with zero errors, the exact form of
  // Hanley & Lippman-Hand's (1983) rule of three: 1 - 0.05^(1/300) = 0.009936.
  assert.equal(answer.tightest.family, 'BOUND_FAMILY_HOLDOUT_EXACT_BINOMIAL');
  assert.equal(answer.tightest.family_name, 'holdout-binomial');
  assert.ok(Math.abs(answer.tightest.risk_upper_bound - (1 - 0.05 ** (1 / 300))) < 1e-12,
    `upper bound ${answer.tightest.risk_upper_bound}`);
  assert.match(requestId, /^[0-9a-f]{32}$/, 'a generated request id comes back');
});

check('Gate: 340 errors in 5,000 against a 5% limit is REJECT', async () => {
  const { answer, requestId } = await call('Gate', {
    policy: { max_risk: 0.05, failure_probability: 0.05 },
    candidate: {
      id: 'late-risk-v14',
      evidence: { holdout: { error_count: 340, sample_count: 5000 } },
    },
  }, 'node-client-gate-1');
  // 340/5000 = 6.8%: the one-sided Clopper-Pearson lower limit is above 5%
  // (Clopper & Pearson 1934), so the risk is above the limit with confidence.
  assert.equal(answer.verdict, 'VERDICT_REJECT');
  assert.ok(answer.risk_lower_bound > 0.05, `lower bound ${answer.risk_lower_bound}`);
  assert.equal(requestId, 'node-client-gate-1');
  assert.equal(answer.audit.request_id, 'node-client-gate-1');
  assert.match(answer.audit.request_sha256, /^[0-9a-f]{64}$/);
});

check('Certify with two bad fields: INVALID_ARGUMENT with both violations', async () => {
  let failure;
  try {
    await call('Certify', {
      evidence: { holdout: { error_count: 5, sample_count: 3 } },
      failure_probability: 2,
    });
  } catch (err) {
    failure = err;
  }
  assert.ok(failure, 'the call fails');
  assert.equal(failure.code, grpc.status.INVALID_ARGUMENT);
  const { status, details } = errorDetails(failure);
  assert.equal(status.code, grpc.status.INVALID_ARGUMENT);
  assert.equal(status.message, failure.details);
  const badRequest = details['type.googleapis.com/google.rpc.BadRequest'];
  assert.deepEqual(badRequest.field_violations.map((v) => v.field),
    ['failure_probability', 'evidence.holdout.error_count']);
  assert.match(badRequest.field_violations[1].description, /5 errors exceed the 3 samples/);
  const info = details['type.googleapis.com/google.rpc.ErrorInfo'];
  assert.equal(info.reason, 'INVALID_FIELDS');
  assert.equal(info.domain, 'riskbound.v1');
  assert.equal(info.metadata.violation_count, '2');
});

(async () => {
  let failed = 0;
  for (const { name, body } of checks) {
    try {
      await body();
      console.log(`ok   ${name}`);
    } catch (err) {
      failed += 1;
      console.log(`FAIL ${name}\n     ${err && err.stack ? err.stack : err}`);
    }
  }
  client.close();
  console.log(`${checks.length - failed} of ${checks.length} checks passed`);
  process.exit(failed === 0 ? 0 : 1);
})();
