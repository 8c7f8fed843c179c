// The quarantine page names every reason the service can store in words: the codes the
// pipeline writes (ingest-pipeline.ts) and those of a sample's validation (the
// InnovationSampleError union in shared/), read from their sources so that a new code
// without words fails here.
import fs from 'node:fs';
import path from 'node:path';
import { REASON_WORDS } from './quarantine-reasons';

const root = path.resolve(__dirname, '../../../..');

function pipelineCodes(): string[] {
  const text = fs.readFileSync(path.join(root, 'ingest/src/pipeline/ingest-pipeline.ts'), 'utf8');
  return [...text.matchAll(/code: '([a-z_]+)'/g)].map((m) => m[1]);
}

function sampleCodes(): string[] {
  const text = fs.readFileSync(path.join(root, 'shared/src/sample/innovation-sample.ts'), 'utf8');
  const union = /export type \w+Code =([^;]+);/.exec(text);
  return union ? [...union[1].matchAll(/'([a-z_]+)'/g)].map((m) => m[1]) : [];
}

describe('quarantine reason words', () => {
  it('has words for every code the pipeline writes, rate_limit and wrong_partition among them', () => {
    const codes = pipelineCodes();
    expect(codes).toEqual(expect.arrayContaining(['too_large', 'not_json', 'schema', 'rate_limit', 'wrong_partition', 'clock']));
    expect(codes.filter((c) => !(c in REASON_WORDS))).toEqual([]);
  });

  it('has words for every code of a sample that fails validation', () => {
    const codes = sampleCodes();
    expect(codes.length).toBeGreaterThan(5);
    expect(codes.filter((c) => !(c in REASON_WORDS))).toEqual([]);
  });
});
