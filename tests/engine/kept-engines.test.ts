// A record sealed with an earlier engine recomputes as sealed: the engine of its version is kept
// (shared/engine/legacy/kept-engines.ts) and gives back, byte for byte as RFC 8785 canonical JSON,
// the verdicts that engine itself wrote (tests/engine/reference/engine-1.1.2-verdicts.json, written
// by engine 1.1.2 at commit b59be04 from the lots of engine-1.1.2-cases.ts).
import { readFileSync } from 'node:fs';
import canonicalize from 'canonicalize';
import { describe, expect, it } from 'vitest';
import { ENGINE_VERSION, evaluateLot } from '../../shared/engine';
import { evaluateLotAs, KEPT_ENGINE_VERSIONS } from '../../shared/engine/legacy/kept-engines';
import { ENGINE_1_1_2_CASES } from './reference/engine-1.1.2-cases';

const sealed = JSON.parse(readFileSync(new URL('./reference/engine-1.1.2-verdicts.json', import.meta.url), 'utf8')) as Record<string, unknown>;

describe('kept engines', () => {
  it('keeps 1.1.2 and today’s engine, today’s last', () => {
    expect(KEPT_ENGINE_VERSIONS).toEqual(['1.1.2', ENGINE_VERSION]);
    expect(ENGINE_VERSION).not.toBe('1.1.2');
  });

  it.each(Object.keys(ENGINE_1_1_2_CASES))('engine 1.1.2 gives back its sealed verdict: %s', (name) => {
    const again = evaluateLotAs('1.1.2', ENGINE_1_1_2_CASES[name]!);
    expect(again?.ok).toBe(true);
    if (!again?.ok) return;
    expect(canonicalize(again.verdict)).toBe(canonicalize(sealed[name]));
  });

  it('today’s engine judges some of those lots differently (which is why 1.1.2 is kept)', () => {
    const changed = Object.keys(ENGINE_1_1_2_CASES).filter((name) => {
      const now = evaluateLot(ENGINE_1_1_2_CASES[name]!);
      return !now.ok || canonicalize(now.verdict) !== canonicalize(sealed[name]);
    });
    // e.g. OIML R 87 1 500 g: TNE 22.5 g then, 23 g now (markets.md §1.1)
    expect(changed).toContain('oiml 1500 g');
  });

  it('today’s version judges with today’s engine; an unkept version gives null', () => {
    const input = ENGINE_1_1_2_CASES['eu lot 2000 n 50']!;
    expect(canonicalize(evaluateLotAs(ENGINE_VERSION, input))).toBe(canonicalize(evaluateLot(input)));
    expect(evaluateLotAs('1.0.0', input)).toBeNull();
  });
});
