import { expect } from 'vitest';

// Tolerance checks of the physics tests (test/physics*.test.ts).

/** Fails with input, expected, actual and tolerance in the message. */
export function expectNear(what: string, actual: number, expected: number, tol: number): void {
  const err = Math.abs(actual - expected);
  expect(err <= tol, `${what}: expected ${expected}, actual ${actual}, |error| ${err} > tolerance ${tol}`).toBe(true);
}
export function expectRel(what: string, actual: number, expected: number, relTol: number): void {
  expectNear(what, actual, expected, Math.abs(expected) * relTol);
}
