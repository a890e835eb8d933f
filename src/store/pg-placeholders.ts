/** A statement's text with PostgreSQL's numbered parameters, and how to order the values it is given. */
export interface NumberedStatement {
  text: string;
  /** For `?` parameters: how many. */
  positional: number;
  /** For `@name` parameters: the name behind each number, in order ($1 is names[0]). */
  names: string[];
}

/**
 * Rewrites the SQLite-style parameters of a statement (`?` in order, or `@name`) into PostgreSQL's `$1, $2, …`.
 * Text inside string literals ('…'), quoted identifiers ("…") and comments is left alone. A statement may not
 * mix the two styles (better-sqlite3 refuses that too). The same name used twice gets the same number.
 */
export function numberParameters(sql: string): NumberedStatement {
  let text = '';
  let positional = 0;
  const names: string[] = [];
  let i = 0;
  while (i < sql.length) {
    const c = sql[i]!;
    if (c === "'" || c === '"') {
      const end = closingQuote(sql, i, c);
      text += sql.slice(i, end);
      i = end;
    } else if (c === '-' && sql[i + 1] === '-') {
      const end = sql.indexOf('\n', i);
      const stop = end === -1 ? sql.length : end;
      text += sql.slice(i, stop);
      i = stop;
    } else if (c === '/' && sql[i + 1] === '*') {
      const end = sql.indexOf('*/', i + 2);
      const stop = end === -1 ? sql.length : end + 2;
      text += sql.slice(i, stop);
      i = stop;
    } else if (c === '?') {
      positional += 1;
      text += `$${positional}`;
      i += 1;
    } else if (c === '@' && /[A-Za-z_]/.test(sql[i + 1] ?? '')) {
      const name = /^[A-Za-z_][A-Za-z0-9_]*/.exec(sql.slice(i + 1))![0];
      let n = names.indexOf(name);
      if (n === -1) n = names.push(name) - 1;
      text += `$${n + 1}`;
      i += 1 + name.length;
    } else {
      text += c;
      i += 1;
    }
  }
  if (positional > 0 && names.length > 0) throw new Error(`a statement mixes ? and @name parameters: ${sql.trim().slice(0, 120)}`);
  return { text, positional, names };
}

/** Index just past the quote that closes the one at `start` (a doubled quote is an escaped one). */
function closingQuote(sql: string, start: number, quote: string): number {
  let i = start + 1;
  while (i < sql.length) {
    if (sql[i] === quote) {
      if (sql[i + 1] === quote) i += 2;
      else return i + 1;
    } else i += 1;
  }
  throw new Error(`unterminated ${quote === "'" ? 'string literal' : 'quoted identifier'} in: ${sql.trim().slice(0, 120)}`);
}

/** The values in $-order: the arguments as given for `?`, or the named object's fields for `@name`. */
export function orderValues(statement: NumberedStatement, params: readonly unknown[], sql: string): unknown[] {
  if (statement.names.length === 0) {
    if (params.length !== statement.positional) {
      throw new RangeError(`the statement takes ${statement.positional} parameter(s), ${params.length} given: ${sql.trim().slice(0, 120)}`);
    }
    return params.map(toValue);
  }
  const bag = params[0];
  if (params.length !== 1 || typeof bag !== 'object' || bag === null) {
    throw new TypeError(`the statement takes named parameters (one object): ${sql.trim().slice(0, 120)}`);
  }
  return statement.names.map((name) => {
    if (!(name in bag)) throw new RangeError(`missing named parameter @${name}: ${sql.trim().slice(0, 120)}`);
    return toValue((bag as Record<string, unknown>)[name]);
  });
}

function toValue(v: unknown): unknown {
  if (v === undefined) return null;
  if (typeof v === 'bigint') return v.toString();
  return v;
}
