import { describe, expect, it } from 'vitest';
import { buildDesignPlan } from '../../src/plan/design-plan.js';
import { designPlanFromJson, designPlanToJson } from '../../src/plan/design-plan-json.js';
import { partitionPredicates } from '../../src/plan/partition-predicates.js';
import { jobIdOf, mergeQueueName, partitionQueueName } from '../../src/schedule/fit-queue.js';
import { parseFitSpec } from '../../src/spec/parse-fit-spec.js';

const spec = parseFitSpec(
  [
    'name: load',
    "source: select * from grid.readings where kind = 'meter'",
    'response: load_kw',
    'terms: [temp_c]',
    'categorical: [weekday]',
    'segment_by: feeder',
    'partition_key: meter_id',
    'split: {partitions: 3}',
  ].join('\n'),
  'load.yaml',
);

describe('the plan of a split run, stored and read back (issue 5)', () => {
  it('gives the same queries, bound values and columns after a trip through JSON', () => {
    const levels = [{ column: 'weekday', levels: ['Mon', 'Tue', "O'Day"], reference: 'Mon' }];
    const plan = buildDesignPlan(spec, new Map(), levels, partitionPredicates(spec, 3, null));
    const extended = buildDesignPlan(spec, new Map(), levels, partitionPredicates(spec, 3, null), new Set(['terms[0]']));
    const full = { ...plan, extended };
    const again = designPlanFromJson(JSON.parse(JSON.stringify(designPlanToJson(full))));
    expect(again.queries).toHaveLength(3);
    expect(again.queries.map((q) => q.toBound())).toEqual(full.queries.map((q) => q.toBound()));
    expect(again.extended?.queries.map((q) => q.toBound())).toEqual(extended.queries.map((q) => q.toBound()));
    expect(again.extended?.valueTypes).toEqual(['numeric', 'float8', 'float8', 'float8']);
    expect({ ...again, queries: [], extended: undefined }).toEqual({ ...full, queries: [], extended: undefined });
    // Each partition carries its own predicate value.
    expect(again.queries.map((q) => q.toBound().values.slice(-2))).toEqual([
      [3, 0],
      [3, 1],
      [3, 2],
    ]);
  });

  it('refuses what is not a stored plan, saying what is wrong', () => {
    expect(() => designPlanFromJson(null)).toThrow(/must be an object/);
    expect(() => designPlanFromJson({ columns: [], valueNames: [], origins: [], keyNames: [], queries: [], valueTypes: [] })).toThrow(
      /queries must be a non-empty list/,
    );
    expect(() => designPlanFromJson({ columns: [1], queries: [['select 1']] })).toThrow(/columns must be a list of strings/);
  });
});

describe('job ids of split runs', () => {
  it('are well-formed UUIDs, the same for the same job and different for any other', () => {
    const part = partitionQueueName('rowfold', 'load');
    const id = jobIdOf(part, 42, 0);
    expect(id).toMatch(/^[0-9a-f]{8}-[0-9a-f]{4}-5[0-9a-f]{3}-[89ab][0-9a-f]{3}-[0-9a-f]{12}$/);
    expect(jobIdOf(part, 42, 0)).toBe(id);
    const others = [jobIdOf(part, 42, 1), jobIdOf(part, 43, 0), jobIdOf(mergeQueueName('rowfold', 'load'), 42, 0), jobIdOf(partitionQueueName('other', 'load'), 42, 0)];
    expect(new Set([id, ...others]).size).toBe(5);
  });
});
