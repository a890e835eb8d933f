import { describe, expect, it } from 'vitest';
import { numberParameters, orderValues } from '../../src/store/pg-placeholders.js';

// PostgreSQL numbers its parameters $1, $2, … (PostgreSQL documentation, "PREPARE" and "Positional Parameters");
// better-sqlite3 takes ? in order or @name. The store writes one statement for both and rewrites it here.
describe('rewriting SQLite parameters for PostgreSQL', () => {
  it('numbers ? in order and leaves string literals, quoted names and comments alone', () => {
    const s = numberParameters(`SELECT "a?" FROM t WHERE x = ? AND y LIKE 'why?%' -- any?\n AND z = ? /* more? */`);
    expect(s.text).toBe(`SELECT "a?" FROM t WHERE x = $1 AND y LIKE 'why?%' -- any?\n AND z = $2 /* more? */`);
    expect(s.positional).toBe(2);
  });

  it('keeps an escaped quote inside a literal', () => {
    expect(numberParameters("SELECT 'it''s ?' , ?").text).toBe("SELECT 'it''s ?' , $1");
  });

  it('gives a name used twice one number, and orders an object by those numbers', () => {
    const s = numberParameters('SELECT * FROM d WHERE (CAST(@type AS TEXT) IS NULL OR type = @type) AND id = @id LIMIT @limit');
    expect(s.text).toBe('SELECT * FROM d WHERE (CAST($1 AS TEXT) IS NULL OR type = $1) AND id = $2 LIMIT $3');
    expect(orderValues(s, [{ id: 'gh-1', limit: 5, type: undefined }], 'q')).toEqual([null, 'gh-1', 5]);
  });

  it('refuses a wrong number of values, a missing name and a mix of styles, naming the statement', () => {
    expect(() => orderValues(numberParameters('SELECT ?, ?'), [1], 'SELECT ?, ?')).toThrow(/takes 2 parameter\(s\), 1 given: SELECT \?, \?/);
    expect(() => orderValues(numberParameters('SELECT @a'), [{}], 'SELECT @a')).toThrow(/missing named parameter @a/);
    expect(() => numberParameters('SELECT ?, @a')).toThrow(/mixes \? and @name/);
    expect(() => numberParameters("SELECT 'open")).toThrow(/unterminated string literal/);
  });
});
