const QUOTE = 0x22;
const BACKSLASH = 0x5c;
const COLON = 0x3a;
const OPEN_BRACE = 0x7b;
const CLOSE_BRACE = 0x7d;
const OPEN_BRACKET = 0x5b;
const CLOSE_BRACKET = 0x5d;

/** Index of the quote that closes the string opening at `open` (JSON escapes skipped), or -1. */
function stringEnd(text: string, open: number): number {
  let i = open;
  for (;;) {
    i = text.indexOf('"', i + 1);
    if (i < 0) return -1;
    let slashes = 0;
    while (text.charCodeAt(i - 1 - slashes) === BACKSLASH) slashes += 1;
    if (slashes % 2 === 0) return i;
  }
}

/**
 * One flat JSON object (no nested object or array) and what follows it in the array. Each character
 * can be matched one way only, so a failed match costs linear time.
 */
const FLAT_ELEMENT = /\s*(\{(?:[^"{}[\]]|"(?:[^"\\]|\\.)*")*\})\s*(,|\])/y;
const CLOSE = /\s*\}\s*$/y;

/** The agents' own envelope, `{"v":N,"events":[` (or with `"epoch":"…",` before the events) then flat events: read with one sticky regex. */
function flatEventTexts(text: string, from: number): string[] | null {
  const out: string[] = [];
  FLAT_ELEMENT.lastIndex = from;
  for (;;) {
    const m = FLAT_ELEMENT.exec(text);
    if (!m) return null;
    out.push(m[1]!);
    if (m[2] === ']') break;
  }
  CLOSE.lastIndex = FLAT_ELEMENT.lastIndex;
  return CLOSE.test(text) ? out : null;
}

/**
 * The JSON text of each element of the top-level `events` array of a message, exactly as received,
 * so the server can store what the device sent without serialising it again. `text` must already
 * have parsed as JSON; returns null when the elements cannot be told apart plainly (a key written
 * with escapes, say) or their number is not `count`, and the caller serialises instead.
 */
export function eventTexts(text: string, count: number): string[] | null {
  const envelope = /^\{"v":\d+,(?:"epoch":"[A-Za-z0-9_-]{8,64}",)?"events":\[/.exec(text);
  const flat = envelope ? flatEventTexts(text, envelope[0].length) : null;
  if (flat && flat.length === count) return flat;
  const out: string[] = [];
  let depth = 0;
  let lastString = '';
  let key = '';
  let inEvents = false;
  let start = -1;
  for (let i = 0; i < text.length; i++) {
    const c = text.charCodeAt(i);
    if (c === QUOTE) {
      const end = stringEnd(text, i);
      if (end < 0) return null;
      if (depth === 1) lastString = text.slice(i + 1, end);
      i = end;
    } else if (c === COLON) {
      if (depth === 1) key = lastString;
    } else if (c === OPEN_BRACE || c === OPEN_BRACKET) {
      if (depth === 1 && c === OPEN_BRACKET && key === 'events') inEvents = true;
      else if (inEvents && depth === 2) start = i;
      depth += 1;
    } else if (c === CLOSE_BRACE || c === CLOSE_BRACKET) {
      depth -= 1;
      if (inEvents && depth === 2 && start >= 0) {
        out.push(text.slice(start, i + 1));
        start = -1;
      } else if (inEvents && depth === 1) {
        inEvents = false;
      }
    }
  }
  return out.length === count ? out : null;
}
